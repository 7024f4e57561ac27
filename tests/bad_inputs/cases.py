"""The bad-input corpus: each case is a command line (and the files it names) with the one line
the tool must answer it with. The messages are the tool's own; each names the key or file, the
bad value, and what is accepted.

Data cases run ``shiftbench data=file data.path=NAME``; graph cases run it on a good 5-node data
file with ``graph=file graph.path=NAME``; config cases are the command line alone.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import zipfile

import networkx as nx
import numpy as np
import scipy.sparse as sp
from numpy.lib import format as npy_format

RNG = np.random.default_rng(0)
GOOD_SIGNALS = RNG.standard_normal((30, 5))
GOOD_LABELS = np.repeat([0, 1, 2], 10)
Writer = Callable[[Path], None] | None


def npz(**arrays) -> Writer:
    return lambda path: np.savez(path, **arrays)


def text(content: str, encoding: str = "utf-8") -> Writer:
    return lambda path: Path(path).write_bytes(content.encode(encoding))


def save_sparse(matrix) -> Writer:
    return lambda path: sp.save_npz(path, sp.csr_matrix(matrix))


def declaring(shape: tuple[int, ...], **arrays) -> Writer:
    """An .npz whose ``signals.npy`` header declares ``shape`` (float32) with no data behind it,
    beside ``arrays``: a few hundred bytes that would ask numpy for prod(shape) * 4 bytes."""

    def write(path: Path) -> None:
        np.savez(path, **arrays)
        with zipfile.ZipFile(path, "a") as archive, archive.open("signals.npy", "w") as member:
            npy_format.write_array_header_1_0(member, {"descr": "<f4", "fortran_order": False, "shape": shape})

    return write


def graphml(graph, weight: float | None = None) -> Writer:
    if weight is not None:
        nx.set_edge_attributes(graph, weight, "weight")
    return lambda path: nx.write_graphml(graph, path)


def with_nan() -> np.ndarray:
    signals = GOOD_SIGNALS.copy()
    signals[4, 2] = np.nan
    signals[7, 1] = np.inf
    return signals


def huge_header_array() -> np.ndarray:
    # A structured dtype of 400 long field names: its .npy header passes numpy's 10 kB limit.
    fields = np.dtype([(f"field_{index:05d}_{'x' * 40}", "f4") for index in range(400)])
    return np.zeros(30, dtype=fields)


def write_good_data(path: Path) -> None:
    np.savez(path, signals=GOOD_SIGNALS, labels=GOOD_LABELS)


CONFIG_CASES: list[tuple[list[str], str]] = [
    (["arch.order=abc"], "arch.order='abc' has the wrong type; accepted: an integer"),
    (["train.batch_size=1.5"], "train.batch_size=1.5 has the wrong type; accepted: an integer"),
    (["arch.foo=1"], "unknown key arch.foo (arch family graph_conv); accepted keys: family, order, channels, "
                     "nonlinearity, readout, dropout, normalization, budget, orders"),
    (["+foo=1"], "unknown key foo; accepted top-level keys: seed, split, folds, task, results_dir, device, force, threads, data, graph, arch, train"),
    (["arch=cnn"], "arch='cnn' is not accepted; accepted: one of fc, forest, graph_conv, lda, line_conv, logistic, nearest, qda, ridge"),
    (["graph=ring"], "graph='ring' is not accepted; accepted: one of correlation, cycle, file, geometric, grid, knn, "
                     "line, native, path, rewired, sbm"),
    (["hydra/launcher=nope"], "hydra/launcher='nope' is not accepted; accepted: one of basic, joblib, slurm_cpu, "
                              "submitit_local, submitit_slurm"),
    (["hydra/launcher=slurm_cpu"], "hydra/launcher=slurm_cpu: no SLURM on this machine (srun not found); run with "
                                   "hydra/launcher=joblib here, or on a cluster's login node"),
    (["arch.order=-1"], "arch.order=-1 is not accepted; accepted: an integer >= 0"),
    (["threads=0"], "threads=0 is not accepted; accepted: an integer >= 1"),
    (["arch=fc,graph_conv"], "arch=fc,graph_conv: several values run only as a sweep; accepted: shiftbench -m arch=fc,graph_conv "
                             "(one job each), or one value"),
    (["folds=1"], "folds=1 is not accepted; accepted: 0 (no outer folds) or an integer >= 2"),
    (["folds=500"], "folds=500 is not accepted: the smallest class has 200 samples; accepted: an integer from 2 to 200 "
                    "(outer folds, each testing part of every class)"),
    (["arch=line_conv", "arch.padding=valid"], "arch.padding='valid' is not accepted; accepted: one of causal, same"),
    (["train.lr=inf"], "train.lr=inf is not accepted; accepted: a number > 0"),
    (["data.noise=inf"], "data.noise=inf is not accepted; accepted: a number >= 0"),
    (["graph=rewired", "graph.swaps_per_edge=inf"], "graph.swaps_per_edge=inf is not accepted; accepted: a number >= 0"),
    (["seed=${nope}"], "seed='${nope}' does not resolve (Interpolation key 'nope' not found); accepted: a value, or an "
                       "interpolation that resolves (${oc.env:NAME} needs NAME set)"),
    (["results_dir=${oc.env:SHIFTBENCH_UNSET_VARIABLE}"],
     "results_dir='${oc.env:SHIFTBENCH_UNSET_VARIABLE}' does not resolve (KeyError raised while resolving "
     "interpolation: \"Environment variable 'SHIFTBENCH_UNSET_VARIABLE' not found\"); accepted: a value, or an "
     "interpolation that resolves (${oc.env:NAME} needs NAME set)"),
    (["results_dir=good.npz"], "results_dir='good.npz': 'good.npz' is a file; accepted: a folder path"),
    (["results_dir=good.npz/runs"], "results_dir='good.npz/runs': 'good.npz' is a file; accepted: a folder path"),
    ([f"results_dir={'r' * 300}"], f"results_dir={'r' * 60!r}...: a name in it is 300 bytes long; accepted: names of "
                                   "at most 255 bytes"),
    (["++hydra.run.dir=../elsewhere"], "hydra.run.dir='../elsewhere' is not accepted; accepted: a folder below the "
                                       "working folder (no '..'), or an absolute path"),
    (["-m", "seed=0,1", "hydra.sweep.subdir=../x"], "hydra.sweep.subdir='../x' is not accepted; accepted: a folder "
                                                   "below the working folder (no '..'), or an absolute path"),
    (["train.epochs=0"], "train.epochs=0 is not accepted; accepted: an integer >= 1"),
    (["train.lr=0"], "train.lr=0.0 is not accepted; accepted: a number > 0"),
    (["train.max_seconds=-5"], "train.max_seconds=-5.0 is not accepted; accepted: a number of seconds > 0, or null"),
    (["train.checkpoint_every=-1"], "train.checkpoint_every=-1 is not accepted; accepted: an integer >= 0 (0: never)"),
    (["train.optimizer=lbfgs"], "train.optimizer='lbfgs' is not accepted; accepted: one of adam, sgd, adadelta"),
    (["train.keep=best"], "train.keep='best' is not accepted; accepted: one of best_val, lowest_train_loss, last"),
    (["train.plateau_factor=1.5"], "train.plateau_factor=1.5 is not accepted; accepted: a number strictly between 0 and 1"),
    (["data=ucr", "data.val_fraction=0"], "train.keep='best_val' is not accepted; accepted: lowest_train_loss or last "
                                          "when data.val_fraction=0 (no validation split to choose on)"),
    (["data=ucr", "data.val_fraction=0", "train.keep=last", "arch=nearest"], "arch.family='nearest' is not accepted; "
     "accepted: a family trained by the loop when data.val_fraction=0 (the floors choose on validation)"),
    (["data.val_fraction=1"], "data.val_fraction=1.0 is not accepted; accepted: a number in [0, 1) (0: no validation split)"),
    (["arch.orders=[2,-1]"], "arch.orders=[2, -1] is not accepted; accepted: null (order for every layer) or a list of "
                             "integers >= 0, one a layer"),
    (["graph.operator=lap"], "graph.operator='lap' is not accepted; accepted: one of adjacency, laplacian, "
                             "normalized_adjacency, normalized_laplacian"),
    (["graph.scale=max"], "graph.scale='max' is not accepted; accepted: one of spectral, none"),
    (["data.nodes=1"], "data.nodes=1 is not accepted; accepted: an integer >= 2"),
    (["seed=-1"], "seed=-1 is not accepted; accepted: an integer >= 0"),
    (["arch.channels=[]"], "arch.channels=[] is not accepted; accepted: a non-empty list of integers >= 1"),
    (["arch.readout=sum"], "arch.readout='sum' is not accepted; accepted: one of mean, max, flatten, node"),
    (["task=node_regression"], "task='node_regression' is not accepted; accepted: classification for data=sensor_regimes"),
    (["data=sensor_forecast"], "task='classification' is not accepted; accepted: node_regression for data=sensor_forecast"),
    (["task=node_regression", "data=sensor_forecast"],
     "arch.readout='mean' is not accepted; accepted: node for a task that predicts a value on every node"),
    (["arch.readout=node"], "arch.readout='node' is not accepted; accepted: mean, max, flatten for a task that predicts one value per signal"),
    (["task=node_regression", "data=sensor_reconstruction", "arch=forest"],
     "task='node_regression' is not accepted; accepted: classification for arch=forest"),
    (["task=regression", "data=tser", "arch=logistic"], "task='regression' is not accepted; accepted: classification for arch=logistic"),
    (["task=regression", "data=digits"], "task='regression' is not accepted; accepted: classification for data=digits"),
    (["data=tser"], "task='classification' is not accepted; accepted: regression for data=tser"),
    (["data=sensor_leak"], "task='classification' is not accepted; accepted: source_localization for data=sensor_leak"),
    (["data=sensor_leak_size"], "task='classification' is not accepted; accepted: regression for data=sensor_leak_size"),
    (["data=sensor_zones"], "task='classification' is not accepted; accepted: node_classification for data=sensor_zones"),
    (["data=series_gaps"], "task='classification' is not accepted; accepted: node_regression for data=series_gaps"),
    (["arch=line_conv", "arch.boundary=reflect"], "arch.boundary='reflect' is not accepted; accepted: one of zero, circular"),
    (["data.val_fraction=0.9"], "data.test_fraction=0.2 is not accepted; accepted: a fraction below 0.1 "
                                "(val_fraction + test_fraction < 1)"),
    (["data=ucr", "data.name=NoSuchSeries"], "data.name='NoSuchSeries' is not accepted; accepted: one of ACSF1, "
     "ArrowHead, BasicMotions, GunPoint, ItalyPowerDemand, JapaneseVowels, OSULeaf, PickupGestureWiimoteZ, UnitTest"),
    (["graph=grid", "graph.rows=4"], "graph.rows*graph.cols=4*8=32 is not accepted; accepted: rows*cols equal to the "
                                     "data's 64 nodes"),
    (["graph=knn", "graph.neighbors=64"], "graph.neighbors=64 is not accepted; accepted: fewer than the data's 64 nodes"),
    (["-m", "arch=fc,cnn"], "arch='cnn' is not accepted; accepted: one of fc, forest, graph_conv, lda, line_conv, logistic, nearest, qda, ridge"),
    (["-m", "arch.order=1,2,-3"], "arch.order=-3 is not accepted; accepted: an integer >= 0"),
    (["-m", "+experiment=nope"], "experiment='nope' is not accepted; accepted: one of budget, claims, families, "
                                 "graphs, node_tasks, orders, scaling"),
    (["results_dir=../outside"], "results_dir='../outside' is not accepted; accepted: a folder below the working "
                                 "folder (no '..'), or an absolute path"),
    (["-m", "hydra.sweep.dir=runs/../../x"], "hydra.sweep.dir='runs/../../x' is not accepted; accepted: a folder "
                                             "below the working folder (no '..'), or an absolute path"),
    (["arch=fc", "arch.hidden=[100000]", "data.nodes=100000"],
     "arch=fc at 100,000 nodes (10,000,500,004 parameters, 800 samples) needs 440.9 GB to train (parameters "
     "440.0 GB, activations 0.2 GB, data 0.6 GB), but 24.0 GB of memory is available; accepted: a job that fits "
     "(narrower layers, fewer nodes or samples, a smaller train.batch_size, or a convolutional family, whose count "
     "does not grow with the nodes)"),
    (["arch=nearest", "data.nodes=10000000"],
     "arch=nearest at 10,000,000 nodes (0 parameters, 800 samples) needs 64.1 GB to train (parameters 0.0 GB, "
     "activations 0.0 GB, data 64.0 GB), but 24.0 GB of memory is available; accepted: a job that fits (narrower "
     "layers, fewer nodes or samples, a smaller train.batch_size, or a convolutional family, whose count does not "
     "grow with the nodes)"),
]

DATA_CASES: list[tuple[str, Writer, str]] = [
    ("missing.npz", None, "no such file; give the path of a .npz or .csv file"),
    ("two_values.npz", npz(signals=GOOD_SIGNALS[:2], targets=RNG.standard_normal((2, 1))),
     "has 2 samples; a train/val/test split needs at least 3 (or give a 'split' array)"),
    ("data.txt", text("1,2,3"), "has suffix '.txt'; accepted: .npz or .csv"),
    ("torn.npz", text("not a zip archive"), "cannot be read as .npz (not a zip archive); save it with numpy.savez"),
    ("empty.npz", text(""), "cannot be read as .npz (not a zip archive); save it with numpy.savez"),
    ("pickled.npz", npz(signals=GOOD_SIGNALS, labels=np.array([{"a": 1}] * 30, dtype=object)),
     "holds pickled Python objects; save plain numeric or string arrays"),
    ("huge_header.npz", npz(signals=huge_header_array(), labels=GOOD_LABELS),
     "has an array header beyond numpy's safety limit; save plain numeric arrays"),
    ("nolabels.npz", npz(signals=GOOD_SIGNALS),
     "has no array 'labels'; save signals (samples, nodes[, features]) and one of labels (samples,) (classes), "
     "targets (values per signal), node_targets (values on every node), node_labels (classes on every node) or "
     "sources (the node each signal started at)"),
    ("labels_and_targets.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS, targets=np.zeros(30)),
     "has both 'labels' and 'targets'; save signals (samples, nodes[, features]) and one of labels (samples,) "
     "(classes), targets (values per signal), node_targets (values on every node), node_labels (classes on every "
     "node) or sources (the node each signal started at)"),
    ("sources_out_of_range.npz", npz(signals=GOOD_SIGNALS, sources=np.arange(30) % 6),
     "sources hold node 5; accepted: node indices 0..4"),
    ("node_labels_below.npz", npz(signals=GOOD_SIGNALS, node_labels=np.full((30, 5), -2)),
     "node_labels hold values below -1 or no class at all; accepted: classes 0, 1, ... and -1 where a node is not a target"),
    ("text_targets.npz", npz(signals=GOOD_SIGNALS, targets=np.array(["high"] * 30)),
     "targets have dtype <U4; accepted: real numbers (classes go in 'labels')"),
    ("nan_targets.npz", npz(signals=GOOD_SIGNALS, targets=np.where(np.arange(30) == 4, np.nan, 1.0)),
     "targets hold NaN or infinite values (first at sample 4); remove those samples"),
    ("node_targets_shape.npz", npz(signals=GOOD_SIGNALS, node_targets=np.zeros((30, 4))),
     "node_targets have shape (30, 4); accepted: (30, 5) or (30, 5, outputs)"),
    ("nan_in_mask.npz", npz(signals=GOOD_SIGNALS, node_targets=np.where(np.eye(30, 5) > 0, np.nan, 1.0),
                            mask=np.ones((30, 5), dtype=bool)),
     "node_targets hold NaN or infinite values where mask is True (first at sample 0, node 0); mark them False "
     "in a boolean 'mask' (samples, nodes), or fill them"),
    ("mask_hides_all.npz", npz(signals=GOOD_SIGNALS, node_targets=np.zeros((30, 5)), mask=np.zeros((30, 5), dtype=bool)),
     "mask hides every node; accepted: True where a node's value is a target, somewhere"),
    ("label_and_target.csv", text("label,target,a,b\n0,1.5,1,2\n1,2.5,2,3\n"),
     "has a 'label' column and 'target'; accepted: 'label' (classes) or target columns (values), not both"),
    ("flat.npz", npz(signals=np.arange(30.0), labels=GOOD_LABELS),
     "signals has shape (30,); accepted: (samples, nodes) or (samples, nodes, features)"),
    ("deep.npz", npz(signals=np.zeros((30, 2, 2, 2)), labels=GOOD_LABELS),
     "signals has shape (30, 2, 2, 2); accepted: (samples, nodes) or (samples, nodes, features)"),
    ("no_samples.npz", npz(signals=np.zeros((0, 5)), labels=np.zeros(0, dtype=int)),
     "signals has shape (0, 5); accepted: at least 1 sample, 2 nodes and 1 feature"),
    ("complex.npz", npz(signals=GOOD_SIGNALS.astype(complex), labels=GOOD_LABELS),
     "signals has dtype complex128; accepted: real numbers"),
    ("nan.npz", npz(signals=with_nan(), labels=GOOD_LABELS),
     "signals holds 2 NaN or infinite values (first at sample 4, node 2); remove or impute them"),
    ("count.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS[:29]),
     "signals has 30 samples but labels has 29; they must agree"),
    ("labels_2d.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS.reshape(10, 3)),
     "labels has shape (10, 3); accepted: (samples,)"),
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
     "has no 'label' column; write a header row with a 'label' column (or 'target' columns) and one column per node"),
    ("words.csv", text("label,a,b\n0,1,x\n1,3,4\n"),
     "column 'b' is not numeric; every column but 'label' (or the target columns) must hold node values"),
    ("empty.csv", text(""), "is empty; write a header row with a 'label' column and one column per node"),
    ("header_only.csv", text("label,a,b\n"), "has a header but no rows; accepted: one sample a row"),
    ("infinite.csv", text("label,a,b\n0,inf,1\n1,2,3\n2,1,1\n"),
     "signals holds 1 NaN or infinite values (first at sample 0, node 0); remove or impute them"),
    ("utf16.csv", text("label,a,b\n0,1,2\n1,3,4\n", "utf-16"),
     "is not UTF-8 text (byte 0xff at offset 0); save it as UTF-8"),
    ("latin1.csv", text("label,caf\xe9,b\n0,1,2\n1,3,4\n", "latin-1"),
     "is not UTF-8 text (byte 0xe9 at offset 9); save it as UTF-8"),
    ("ragged.csv", text("label,a,b\n0,1,2\n1,2,3,4\n"),
     "cannot be read as CSV (Error tokenizing data. C error: Expected 3 fields in line 3, saw 4)"),
    ("declares_petabytes.npz", declaring((10**9, 10**6), labels=GOOD_LABELS),
     "would take 4,000,000.0 GB of memory to read ('signals.npy' alone 4,000,000.0 GB), but 24.0 GB is available; "
     "accepted: arrays that fit in memory"),
    ("saved_index.csv", text(",label,a,b\n0,0,1.5,2\n1,1,3.5,4\n2,0,0.5,1\n"),
     "column 1 has no name (a row index saved by pandas' to_csv?); save with index=False, or name every column"),
    ("row_numbers.csv", text("label,index,a\n0,0,1.5\n1,1,2.5\n0,2,0.5\n"),
     "column 'index' holds the row numbers, not node values (a saved index?); drop it"),
    ("two_labels.csv", text("label,a,label\n0,1,2\n1,2,3\n"),
     "has column 'label' twice (columns 1 and 3); give every column its own name"),
    ("empty_label.csv", text("label,a,b\n0,1,2\n,2,3\n1,2,2\n"),
     "has 1 empty label cells (first on line 3); give every row its label"),
    ("one_class_train.npz", npz(signals=GOOD_SIGNALS, labels=GOOD_LABELS, split=np.repeat([0, 1, 2], 10)),
     "split's train part holds a single class; give the train samples at least 2 classes"),
]

GRAPH_CASES: list[tuple[str, Writer, str]] = [
    ("missing.csv", None, "no such file; give the path of an edge-list .csv, a scipy .npz, .graphml or .gml"),
    ("graph.json", text("{}"), "has suffix '.json'; accepted: .csv, .npz, .graphml, .gml"),
    ("header.csv", text("from,to\n0,1\n"), "has columns ['from', 'to']; accepted: a header source,target or "
                                            "source,target,weight"),
    ("no_edges.csv", text("source,target\n"), "has a header but no edges; accepted: one edge a row"),
    ("float_ids.csv", text("source,target\n0.5,1\n"), "source and target must be integer node ids 0..nodes-1"),
    ("outside.csv", text("source,target\n0,7\n"), "node id 7 is outside the data's 5 nodes; accepted: ids 0..4"),
    ("negative_id.csv", text("source,target\n-1,2\n"), "node id -1 is outside the data's 5 nodes; accepted: ids 0..4"),
    ("duplicate.csv", text("source,target\n0,1\n1,2\n0,1\n"),
     "lists edge 0 -> 1 more than once (lines 2, 4); accepted: each edge once"),
    ("weights.csv", text("source,target,weight\n0,1,heavy\n"), "weight column holds values that are not finite numbers"),
    ("nan_weight.csv", text("source,target,weight\n0,1,nan\n"), "weight column holds values that are not finite numbers"),
    ("empty.csv", text(""), "is empty; write a header source,target[,weight] and one edge a row"),
    ("utf16.csv", text("source,target\n0,1\n", "utf-16"), "is not UTF-8 text (byte 0xff at offset 0); save it as UTF-8"),
    ("notsparse.npz", npz(a=np.zeros(3)), "is not a matrix saved with scipy.sparse.save_npz"),
    ("rectangular.npz", save_sparse(np.ones((5, 4))), "holds a 5x4 matrix; accepted: a square adjacency"),
    ("small.npz", save_sparse(np.eye(4, k=1)), "has 4 nodes but the data has 5; they must agree"),
    ("complex.npz", save_sparse(np.eye(5, k=1) * (1 + 2j)), "holds complex weights; accepted: real weights"),
    ("text_weights.npz", npz(format=np.array(b"csr"), shape=np.array([5, 5]), data=np.array(["x", "y"]),
                             indices=np.array([1, 2]), indptr=np.array([0, 1, 2, 2, 2, 2])),
     "holds weights of dtype <U1; accepted: real numbers"),
    ("outside.npz", npz(format=np.array(b"csr"), shape=np.array([5, 5]), data=np.ones(2), indices=np.array([1, 9]),
                        indptr=np.array([0, 1, 2, 2, 2, 2])),
     "holds a malformed sparse matrix (indices must be < 5); save a valid matrix with scipy.sparse.save_npz"),
    ("nan_weight.graphml", graphml(nx.path_graph(5), weight=float("nan")),
     "holds weights that are not finite float32 numbers (NaN, infinite, or beyond ±3.4e38); accepted: finite weights"),
    ("huge_weight.csv", text("source,target,weight\n0,1,1e39\n1,2,1\n2,3,1\n3,4,1\n"),
     "holds weights that are not finite float32 numbers (NaN, infinite, or beyond ±3.4e38); accepted: finite weights"),
    ("malformed.npz", npz(format=np.array(b"csr"), shape=np.array([5, 5]), data=np.ones(3), indices=np.array([1, 2, 3]),
                          indptr=np.array([0, 2, 1, 3, 3, 3])),
     "holds a malformed sparse matrix (indptr must be a non-decreasing sequence); save a valid matrix with "
     "scipy.sparse.save_npz"),
    ("small.graphml", graphml(nx.path_graph(3)), "has 3 nodes but the data has 5; they must agree"),
    ("text_weights.gml", text('graph [ node [ id 0 label "a" ] node [ id 1 label "b" ] edge [ source 0 target 1 '
                              'weight "x" ] ]'), "has edge weights that are not numbers"),
]

# (file, its content, extra arguments, the whole message)
OPERATOR_CASES: list[tuple[str, Writer, list[str], str]] = [
    ("negative.csv", text("source,target,weight\n0,1,-1\n1,2,1\n2,3,1\n3,4,1\n"), ["graph.operator=laplacian"],
     "graph.operator='laplacian' is not accepted for a graph with 1 negative edge weights; accepted: adjacency "
     "or normalized_adjacency"),
    ("negative.npz", save_sparse(np.diag(-np.ones(4), 1)), ["graph.operator=normalized_laplacian"],
     "graph.operator='normalized_laplacian' is not accepted for a graph with 4 negative edge weights; accepted: "
     "adjacency or normalized_adjacency"),
]
