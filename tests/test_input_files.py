"""A job's hash covers the bytes of the files it reads, not only their names: a changed file
never reuses the record made from the old one (content addressing, common practice, no
source)."""

import os

import numpy as np

from shiftbench.job import run_job


def write_signals(path, seed):
    """A small classification file of 40 signals on 6 nodes, drawn from ``seed``."""
    random = np.random.default_rng(seed)
    np.savez(path, signals=random.standard_normal((40, 6)), labels=np.tile([0, 1], 20))


def file_job(tmp_path, *overrides):
    from tests.conftest import composed

    return composed([f"results_dir={tmp_path}", "data=file", f"data.path={tmp_path / 'signals.npz'}", "train.epochs=4",
                     "arch=fc", *overrides])


def test_an_overwritten_data_file_trains_again_instead_of_reusing_the_old_record(tmp_path):
    write_signals(tmp_path / "signals.npz", seed=0)
    first = run_job(file_job(tmp_path), None, [], live=False)
    write_signals(tmp_path / "signals.npz", seed=1)
    second = run_job(file_job(tmp_path), None, [], live=False)
    assert not second.get("skipped")
    assert second["config_hash"] != first["config_hash"]
    assert second["config"]["inputs"]["data.path"] != first["config"]["inputs"]["data.path"]


def test_a_file_touched_but_unchanged_reuses_its_record(tmp_path):
    write_signals(tmp_path / "signals.npz", seed=0)
    first = run_job(file_job(tmp_path), None, [], live=False)
    stamp = os.stat(tmp_path / "signals.npz").st_mtime_ns + 5 * 10**9
    os.utime(tmp_path / "signals.npz", ns=(stamp, stamp))
    again = run_job(file_job(tmp_path), None, [], live=False)
    assert again.get("skipped") and again["config_hash"] == first["config_hash"]


def test_a_changed_graph_file_trains_again(tmp_path):
    write_signals(tmp_path / "signals.npz", seed=0)
    (tmp_path / "roads.csv").write_text("source,target\n0,1\n1,2\n2,3\n3,4\n4,5\n")
    overrides = ("arch=graph_conv", f"data.graph={tmp_path / 'roads.csv'}", "graph=native")
    first = run_job(file_job(tmp_path, *overrides), None, [], live=False)
    (tmp_path / "roads.csv").write_text("source,target\n0,5\n1,4\n2,3\n0,3\n1,5\n")
    second = run_job(file_job(tmp_path, *overrides), None, [], live=False)
    assert not second.get("skipped") and second["config_hash"] != first["config_hash"]
    assert set(second["config"]["inputs"]) == {"data.path", "data.graph"}


def test_configs_that_read_no_file_have_no_inputs(small_config):
    record = run_job(small_config("arch=fc"), None, [], live=False)
    assert "inputs" not in record["config"]
