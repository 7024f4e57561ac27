"""Every case of the bad-input corpus (``cases.py``), run through the ``shiftbench`` entry point:
exit status 2, exactly its one-line message on stderr, no traceback, and the records already in
the results folder left as they were."""

import sys
from pathlib import Path

import pytest

import shiftbench.job
import shiftbench.npz_input
from shiftbench.cli import main
from tests.bad_inputs.cases import CONFIG_CASES, DATA_CASES, GRAPH_CASES, OPERATOR_CASES, write_good_data

EARLIER = {"results/store/0123456789abcdef/record.json": b'{"schema_version": 2, "status": "completed"}\n',
           "results/store/0123456789abcdef/curve.csv": b"epoch,train_loss\n1,0.5\n"}


@pytest.fixture
def workspace(tmp_path, monkeypatch):
    """A folder holding good data and an earlier run's files, as the working directory."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(shiftbench.job, "available_memory_bytes", lambda: 24 * 10**9)
    monkeypatch.setattr(shiftbench.npz_input, "available_memory_bytes", lambda: 24 * 10**9)
    write_good_data(tmp_path / "good.npz")
    for name, content in EARLIER.items():
        (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
        (tmp_path / name).write_bytes(content)
    return tmp_path


def refused(workspace: Path, arguments: list[str], capsys, monkeypatch) -> str:
    """Run ``shiftbench ARGUMENTS``; check it exits 2 without a traceback and leaves the earlier
    files alone; return what it printed on stderr."""
    before = sorted(path for path in workspace.rglob("*"))
    monkeypatch.setattr(sys, "argv", ["shiftbench", *arguments])
    with pytest.raises(SystemExit) as stopped:
        main()
    assert stopped.value.code == 2
    printed = capsys.readouterr().err
    assert "Traceback" not in printed
    assert sorted(path for path in workspace.rglob("*")) == before
    assert all((workspace / name).read_bytes() == content for name, content in EARLIER.items())
    return printed


@pytest.mark.parametrize(("arguments", "message"), CONFIG_CASES, ids=[" ".join(case[0]) for case in CONFIG_CASES])
def test_a_bad_config_gets_its_one_line(workspace, capsys, monkeypatch, arguments, message):
    assert refused(workspace, arguments, capsys, monkeypatch) == f"shiftbench: error: {message}\n"


@pytest.mark.parametrize(("name", "write", "problem"), DATA_CASES, ids=[case[0] for case in DATA_CASES])
def test_a_bad_data_file_gets_its_one_line(workspace, capsys, monkeypatch, name, write, problem):
    if write is not None:
        write(workspace / name)
    printed = refused(workspace, ["data=file", f"data.path={name}"], capsys, monkeypatch)
    assert printed == f"shiftbench: error: data.path={name!r}: {problem}\n"


@pytest.mark.parametrize(("name", "write", "problem"), GRAPH_CASES, ids=[case[0] for case in GRAPH_CASES])
def test_a_bad_graph_file_gets_its_one_line(workspace, capsys, monkeypatch, name, write, problem):
    if write is not None:
        write(workspace / name)
    printed = refused(workspace, ["data=file", "data.path=good.npz", "graph=file", f"graph.path={name}"], capsys, monkeypatch)
    assert printed == f"shiftbench: error: graph.path={name!r}: {problem}\n"


@pytest.mark.parametrize(("name", "write", "extra", "message"), OPERATOR_CASES, ids=[case[0] for case in OPERATOR_CASES])
def test_an_operator_the_graph_cannot_take_gets_its_one_line(workspace, capsys, monkeypatch, name, write, extra, message):
    write(workspace / name)
    arguments = ["data=file", "data.path=good.npz", "graph=file", f"graph.path={name}", *extra]
    assert refused(workspace, arguments, capsys, monkeypatch) == f"shiftbench: error: {message}\n"


def test_negative_weights_are_fine_for_the_adjacency():
    import numpy as np
    import scipy.sparse as sp

    from shiftbench.graphs.graph import Graph
    from shiftbench.graphs.operators import operator_matrix

    graph = Graph.from_adjacency(sp.csr_matrix(np.array([[0, -1.0], [-1.0, 0]])))
    assert operator_matrix(graph, "adjacency").nnz == 2


def node_file_without_test_targets(path, kind):
    """20 signals on 4 nodes, 12 train, 4 validation, 4 test, whose test rows hold no target."""
    import numpy as np

    rng = np.random.default_rng(0)
    split = np.repeat([0, 1, 2], [12, 4, 4])
    if kind == "node_classification":
        targets = rng.integers(0, 2, size=(20, 4))
        targets[split == 2] = -1
        np.savez(path, signals=rng.standard_normal((20, 4)), node_labels=targets, split=split)
    else:
        mask = np.ones((20, 4), dtype=bool)
        mask[split == 2] = False
        np.savez(path, signals=rng.standard_normal((20, 4)), node_targets=rng.standard_normal((20, 4)), mask=mask, split=split)


@pytest.mark.parametrize("task", ["node_classification", "node_regression"])
def test_a_node_task_whose_test_split_holds_no_targets_is_refused_before_any_job(workspace, capsys, monkeypatch, task):
    node_file_without_test_targets(workspace / "nodes.npz", task)
    printed = refused(workspace, ["data=file", "data.path=nodes.npz", f"task={task}", "arch=graph_conv", "arch.readout=node"],
                      capsys, monkeypatch)
    assert printed == ("shiftbench: error: data.path='nodes.npz': the test split (4 samples) holds no targets (every "
                       "entry is unmarked: -1 or NaN, or masked out); accepted: data with targets in every split\n")


def test_an_operator_the_datas_own_graph_cannot_take_stops_a_sweep_before_its_first_job(workspace, capsys, monkeypatch):
    # The graph a signal file carries (data.graph) is the native graph of every job that reads one.
    (workspace / "negative.csv").write_text("source,target,weight\n0,1,-1\n1,2,1\n2,3,1\n3,4,1\n")
    arguments = ["-m", "arch=fc,graph_conv", "data=file", "data.path=good.npz", "data.graph=negative.csv",
                 "graph.operator=laplacian"]
    assert refused(workspace, arguments, capsys, monkeypatch) == (
        "shiftbench: error: graph.operator='laplacian' is not accepted for a graph with 1 negative edge weights; "
        "accepted: adjacency or normalized_adjacency\n")
