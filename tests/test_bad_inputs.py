"""A corpus of malformed data and graph files, each with the one-line message it must produce.

The messages are the tool's own; each names the file, the problem, and what is accepted.
"""

from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp

from shiftbench.data.files import load_signal_file
from shiftbench.errors import ConfigError
from shiftbench.graphs.files import load_graph_file
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import operator_matrix

RNG = np.random.default_rng(0)
GOOD_SIGNALS = RNG.standard_normal((30, 5))
GOOD_LABELS = np.repeat([0, 1, 2], 10)


def npz(**arrays):
    return lambda path: np.savez(path, **arrays)


def text(content):
    return lambda path: Path(path).write_text(content)


def with_nan():
    signals = GOOD_SIGNALS.copy()
    signals[4, 2] = np.nan
    signals[7, 1] = np.inf
    return signals


DATA_CASES = [
    ("missing.npz", None, "no such file; give the path of a .npz or .csv file"),
    ("data.txt", text("1,2,3"), "has suffix '.txt'; accepted: .npz or .csv"),
    ("torn.npz", text("not a zip archive"), "cannot be read as .npz (not a zip archive); save it with numpy.savez"),
    ("pickled.npz", npz(signals=GOOD_SIGNALS, labels=np.array([{"a": 1}] * 30, dtype=object)),
     "holds pickled Python objects; save plain numeric or string arrays"),
    ("nolabels.npz", npz(signals=GOOD_SIGNALS),
     "has no array 'labels'; save signals (samples, nodes[, features]) and labels (samples,)"),
    ("flat.npz", npz(signals=np.arange(30.0), labels=GOOD_LABELS),
     "signals has shape (30,); accepted: (samples, nodes) or (samples, nodes, features)"),
    ("deep.npz", npz(signals=np.zeros((30, 2, 2, 2)), labels=GOOD_LABELS),
     "signals has shape (30, 2, 2, 2); accepted: (samples, nodes) or (samples, nodes, features)"),
    ("nan.npz", npz(signals=with_nan(), labels=GOOD_LABELS),
     "signals holds 2 NaN or infinite values (first at sample 4, node 2); remove or impute them"),
    ("count.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS[:29]),
     "signals has 30 samples but labels has 29; they must agree"),
    ("fractional.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS + 0.5),
     "labels are not all integers; accepted: integer or string class labels"),
    ("one_class.npz", npz(signals=GOOD_SIGNALS, labels=np.zeros(30, dtype=int)),
     "labels hold a single class ('0'); accepted: at least 2 classes"),
    ("tiny_class.npz", npz(signals=GOOD_SIGNALS, labels=np.r_[np.zeros(28, dtype=int), [1, 1]]),
     "class 1 has 2 samples; each class needs at least 3 for a stratified train/val/test split (or give a 'split' array)"),
    ("bad_split.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS, split=np.repeat([0, 1, 3], 10)),
     "split holds 3; accepted: 0 (train), 1 (val), 2 (test)"),
    ("no_test.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS, split=np.repeat([0, 1, 1], 10)),
     "split has no test samples; give each of train, val and test at least one"),
    ("positions.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS, positions=np.zeros((4, 2))),
     "positions has shape (4, 2); accepted: finite (5, dims)"),
    ("nolabel.csv", text("a,b\n1,2\n3,4\n"),
     "has no 'label' column; write a header row with a 'label' column and one column per node"),
    ("words.csv", text("label,a,b\n0,1,x\n1,3,4\n"),
     "column 'b' is not numeric; every column but 'label' must hold node values"),
    ("empty.csv", text(""), "is empty; write a header row with a 'label' column and one column per node"),
]


@pytest.mark.parametrize(("name", "write", "message"), DATA_CASES, ids=[case[0] for case in DATA_CASES])
def test_malformed_data_file_gives_its_one_line_message(tmp_path, name, write, message):
    path = tmp_path / name
    if write is not None:
        write(path)
    with pytest.raises(ConfigError) as caught:
        load_signal_file(str(path))
    assert str(caught.value) == f"data.path={str(path)!r}: {message}"


def save_sparse(matrix):
    return lambda path: sp.save_npz(path, sp.csr_matrix(matrix))


def graphml(graph):
    return lambda path: nx.write_graphml(graph, path)


GRAPH_CASES = [
    ("missing.csv", None, "no such file; give the path of an edge-list .csv, a scipy .npz, .graphml or .gml"),
    ("graph.json", text("{}"), "has suffix '.json'; accepted: .csv, .npz, .graphml, .gml"),
    ("header.csv", text("from,to\n0,1\n"), "has columns ['from', 'to']; accepted: a header source,target or source,target,weight"),
    ("float_ids.csv", text("source,target\n0.5,1\n"), "source and target must be integer node ids 0..nodes-1"),
    ("outside.csv", text("source,target\n0,7\n"), "node id 7 is outside the data's 5 nodes; accepted: ids 0..4"),
    ("negative_id.csv", text("source,target\n-1,2\n"), "node id -1 is outside the data's 5 nodes; accepted: ids 0..4"),
    ("weights.csv", text("source,target,weight\n0,1,heavy\n"), "weight column holds values that are not finite numbers"),
    ("empty.csv", text(""), "is empty; write a header source,target[,weight] and one edge a row"),
    ("notsparse.npz", npz(a=np.zeros(3)), "is not a matrix saved with scipy.sparse.save_npz"),
    ("rectangular.npz", save_sparse(np.ones((5, 4))), "holds a 5x4 matrix; accepted: a square adjacency"),
    ("small.npz", save_sparse(np.eye(4, k=1)), "has 4 nodes but the data has 5; they must agree"),
    ("small.graphml", graphml(nx.path_graph(3)), "has 3 nodes but the data has 5; they must agree"),
    ("broken.graphml", text("<graphml><graph"), "cannot be read as GraphML"),
]


@pytest.mark.parametrize(("name", "write", "message"), GRAPH_CASES, ids=[case[0] for case in GRAPH_CASES])
def test_malformed_graph_file_gives_its_one_line_message(tmp_path, name, write, message):
    path = tmp_path / name
    if write is not None:
        write(path)
    with pytest.raises(ConfigError) as caught:
        load_graph_file(str(path), nodes=5)
    assert str(caught.value).startswith(f"graph.path={str(path)!r}: {message}")
    assert "\n" not in str(caught.value)


def test_negative_weights_are_refused_by_laplacians_only():
    graph = Graph.from_adjacency(sp.csr_matrix(np.array([[0, -1.0], [-1.0, 0]])))
    operator_matrix(graph, "adjacency")
    with pytest.raises(ConfigError) as caught:
        operator_matrix(graph, "laplacian")
    assert str(caught.value) == (
        "graph.operator='laplacian' is not accepted for a graph with 2 negative edge weights; "
        "accepted: adjacency or normalized_adjacency"
    )
