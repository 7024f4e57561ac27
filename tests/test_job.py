"""One job end to end: the record it writes, determinism, and failures kept as records."""

import json

import numpy as np
import pandas as pd
import pytest

import shiftbench.job
from shiftbench.config import ConfigError
from shiftbench.job import run_job
from shiftbench.records import CURVE_FILE, RECORD_FILE, REQUIRED_FIELDS
from tests.conftest import home

DESIGN_FIELDS = {
    "status", "error", "config", "overrides", "config_hash", "family", "graph", "operator", "data",
    "nodes", "order", "seed", "parameters", "train_accuracy", "val_accuracy", "test_accuracy",
    "test_loss", "best_epoch", "epochs_run", "train_seconds", "samples_per_second", "peak_rss_mb",
    "versions", "started", "finished", "schema_version",
}
FIGURES = ["train_accuracy", "val_accuracy", "test_accuracy", "test_loss", "best_epoch", "epochs_run", "parameters"]


def test_record_holds_every_design_field_and_the_curve_matches(small_config, tmp_path):
    record = run_job(small_config("arch=graph_conv"), None, ["arch=graph_conv"], live=False)
    written = json.loads((home(record) / RECORD_FILE).read_text())
    assert DESIGN_FIELDS <= set(written)
    assert DESIGN_FIELDS <= set(REQUIRED_FIELDS) <= set(written)  # the record's declared fields are all written
    assert written["status"] == "completed" and written == record
    curve = pd.read_csv(home(record) / CURVE_FILE)
    assert len(curve) == written["epochs_run"]
    assert curve["val_accuracy"].iloc[written["best_epoch"] - 1] == pytest.approx(written["val_accuracy"])


@pytest.mark.parametrize("family", ["fc", "line_conv", "graph_conv"])
def test_same_config_and_seed_give_identical_figures(small_config, tmp_path, family):
    first = run_job(small_config(f"arch={family}", "seed=5", f"results_dir={tmp_path / 'a'}"), None, [], live=False)
    second = run_job(small_config(f"arch={family}", "seed=5", f"results_dir={tmp_path / 'b'}"), None, [], live=False)
    assert "skipped" not in second
    assert [first[key] for key in FIGURES] == [second[key] for key in FIGURES]
    assert first["config_hash"] == second["config_hash"] and home(first) != home(second)


def test_another_seed_gives_other_figures(small_config, tmp_path):
    first = run_job(small_config("seed=0"), None, [], live=False)
    second = run_job(small_config("seed=1"), None, [], live=False)
    assert first["test_loss"] != second["test_loss"]


def test_a_job_that_fails_in_training_writes_a_failed_record(small_config, tmp_path, monkeypatch):
    def explode(*args, **kwargs):
        raise RuntimeError("simulated failure")

    monkeypatch.setattr(shiftbench.job, "train", explode)
    record = run_job(small_config(), None, [], live=False)
    written = json.loads((home(record) / RECORD_FILE).read_text())
    assert record["status"] == written["status"] == "failed"
    assert written["error"] == "RuntimeError: simulated failure"


def test_a_nan_loss_fails_the_job_with_the_reason(small_config, tmp_path):
    record = run_job(small_config("train.lr=1e30", "train.optimizer=sgd"), None, [], live=False)
    assert record["status"] == "failed"
    assert "TrainingDiverged" in record["error"]


def test_a_config_error_writes_nothing(small_config, tmp_path):
    with pytest.raises(ConfigError, match="graph.rows"):
        run_job(small_config("graph=grid", "graph.rows=5"), None, [], live=False)
    assert not any(tmp_path.iterdir())


def test_a_graph_that_does_not_fit_the_loaded_data_is_a_config_error(small_config, tmp_path, monkeypatch):
    # Datasets whose size is known only once loaded are checked after loading, before training.
    from shiftbench.data import sensor_regimes

    monkeypatch.setattr(shiftbench.job, "load_dataset", lambda config, split, folds: sensor_regimes(nodes=30, samples_per_class=20))
    with pytest.raises(ConfigError, match="equal to the data's 30 nodes"):
        run_job(small_config("graph=grid", "graph.rows=4", "graph.cols=6"), None, [], live=False)
    assert not (tmp_path / "job").exists() and not any((tmp_path / "store").rglob("record.json"))


def test_records_say_which_structure_each_family_used(small_config, tmp_path):
    fc = run_job(small_config("arch=fc"), None, [], live=False)
    line = run_job(small_config("arch=line_conv", "arch.boundary=circular"), None, [], live=False)
    graph = run_job(small_config("graph=sbm", "graph.operator=laplacian"), None, [], live=False)
    assert (fc["graph"], fc["order"]) == ("none", None)
    assert line["graph"] == "cycle"
    assert (graph["graph"], graph["operator"]) == ("sbm", "laplacian")


def test_graph_notes_report_isolated_nodes(small_config, tmp_path):
    graph_file = tmp_path / "g.csv"
    graph_file.write_text("source,target\n0,1\n1,0\n1,2\n2,1\n")
    record = run_job(small_config("graph=file", f"graph.path={graph_file}"), None, [], live=False)
    assert record["status"] == "completed"
    assert record["graph_notes"] == ["21 isolated nodes (3, 4, 5, 6, 7, 8, 9, 10, 11, 12, ...)"]


def test_the_nearest_floor_is_recorded_like_any_run(small_config, tmp_path):
    record = run_job(small_config("arch=nearest"), None, [], live=False)
    assert (record["status"], record["parameters"], record["graph"]) == ("completed", 0, "none")
    assert 0.0 <= record["test_accuracy"] <= 1.0 and record["epochs_run"] is None


def test_a_rerun_of_a_completed_config_is_skipped_and_writes_nothing(small_config, tmp_path):
    first = run_job(small_config("seed=3"), None, [], live=False)
    before = (home(first) / RECORD_FILE).stat().st_mtime_ns
    again = run_job(small_config("seed=3"), None, [], live=False)
    assert again["skipped"] is True and again["finished"] == first["finished"]
    assert (home(first) / RECORD_FILE).stat().st_mtime_ns == before


def test_a_completed_config_is_skipped_whichever_launch_asks_and_the_launch_points_at_its_home(small_config, tmp_path):
    from shiftbench.records import read_manifest

    first = run_job(small_config("seed=4"), tmp_path / "sweep_a", [], live=False)
    again = run_job(small_config("seed=4"), tmp_path / "sweep_b", [], live=False)
    assert again["skipped"] is True
    (entry,) = read_manifest(tmp_path / "sweep_b")
    assert entry["outcome"] == "skipped" and (tmp_path / "sweep_b" / entry["home"]).resolve() == home(first).resolve()
    assert sorted(path.name for path in (tmp_path / "sweep_b").iterdir()) == ["jobs.jsonl"]


def test_force_keeps_the_earlier_record_aside(small_config, tmp_path):
    first = run_job(small_config("seed=3"), None, [], live=False)
    run_job(small_config("seed=3", "force=true"), None, [], live=False)
    (aside,) = (home(first) / "superseded").rglob(RECORD_FILE)
    assert json.loads(aside.read_text())["finished"] == first["finished"]
    assert sorted(path.name for path in aside.parent.iterdir()) == ["curve.csv", "predictions.csv", "record.json", "weights.npz"]


def test_a_config_claimed_by_a_live_process_is_not_trained_twice(small_config, tmp_path):
    import os
    import socket

    from shiftbench.records import config_hash
    from shiftbench.config import as_plain_dict, validate

    config = small_config("seed=8")
    target = tmp_path / "store" / config_hash(as_plain_dict(validate(config)))
    target.mkdir(parents=True)
    # The parent of this test process is alive: its claim holds.
    (target / "claim").write_text(json.dumps({"host": socket.gethostname(), "pid": os.getppid(), "since": "now"}))
    record = run_job(config, None, [], live=False)
    assert record["skipped"] is True and not (target / RECORD_FILE).exists()
    (target / "claim").write_text(json.dumps({"host": socket.gethostname(), "pid": 2**22 + 12345, "since": "then"}))
    record = run_job(config, None, [], live=False)  # a dead holder's claim is taken over
    assert record["status"] == "completed" and not (target / "claim").exists()


def test_force_recomputes_a_completed_config(small_config, tmp_path):
    run_job(small_config("seed=3"), None, [], live=False)
    again = run_job(small_config("seed=3", "force=true"), None, [], live=False)
    assert "skipped" not in again and again["status"] == "completed"


def test_a_failed_record_is_retried(small_config, tmp_path, monkeypatch):
    def explode(*args, **kwargs):
        raise RuntimeError("simulated failure")

    with monkeypatch.context() as patch:
        patch.setattr(shiftbench.job, "train", explode)
        assert run_job(small_config("seed=6"), None, [], live=False)["status"] == "failed"
    retried = run_job(small_config("seed=6"), None, [], live=False)
    assert retried["status"] == "completed" and "skipped" not in retried


def test_a_job_computes_with_the_configured_thread_count_and_records_it(small_config):
    import torch

    before = torch.get_num_threads()
    try:
        record = run_job(small_config("threads=2"), None, [], live=False, quiet=True)
    finally:
        torch.set_num_threads(before)
    assert record["torch_threads"] == 2
    # The thread count is how a job runs, not what it computes: the same config is not redone.
    assert run_job(small_config("threads=1"), None, [], live=False, quiet=True).get("skipped")


def test_jobs_in_one_process_build_a_shared_dataset_and_graph_once(small_config, tmp_path, monkeypatch):
    from shiftbench import cache

    cache.clear()
    calls = {"data": 0, "graph": 0}
    real_load, real_build = shiftbench.job.load_dataset, shiftbench.job.build_graph

    def counting_load(config, split, folds):
        calls["data"] += 1
        return real_load(config, split, folds)

    def counting_build(config, dataset):
        calls["graph"] += 1
        return real_build(config, dataset)

    monkeypatch.setattr(shiftbench.job, "load_dataset", counting_load)
    monkeypatch.setattr(shiftbench.job, "build_graph", counting_build)
    for seed in range(3):
        run_job(small_config(f"seed={seed}", "graph=sbm"), None, [], live=False)
    run_job(small_config("arch=fc"), None, [], live=False)
    assert calls == {"data": 1, "graph": 1}


def test_a_budget_that_cannot_be_met_fails_the_job_with_the_reason_and_keeps_the_budget(small_config, tmp_path):
    record = run_job(small_config("arch=fc", "arch.budget=10"), None, [], live=False)
    assert record["status"] == "failed" and record["budget"] == 10
    assert record["error"].startswith("BudgetError: arch.budget=10 cannot be met")


def test_a_refusal_that_needs_the_data_fails_that_job_of_a_sweep_and_the_sweep_goes_on(small_config, tmp_path, monkeypatch):
    # The memory check of a loaded dataset, on a machine with 10 kB to spare.
    monkeypatch.setattr(shiftbench.job, "available_memory_bytes", lambda: 10**4)
    record = run_job(small_config("arch=fc"), tmp_path / "sweep", [], live=False, quiet=True)
    assert record["status"] == "failed" and record["error"].startswith("ConfigError: arch=fc at 24 nodes")
    single = small_config("arch=fc", f"results_dir={tmp_path / 'single'}")
    with pytest.raises(ConfigError, match="arch=fc at 24 nodes"):  # a single job is refused in one line
        run_job(single, None, [], live=False)
    assert not list((tmp_path / "single").rglob(RECORD_FILE))


def test_temporary_files_of_killed_writes_are_cleared_when_the_home_is_claimed(small_config):
    from tests.conftest import home_of_config

    config = small_config()
    folder = home_of_config(config)
    folder.mkdir(parents=True)
    (folder / ".record.json.abc123.tmp").write_text("{half a rec")
    (folder / ".checkpoint.pt.def456.tmp").write_bytes(b"\x80")
    run_job(config, None, [], live=False, quiet=True)
    assert not list(folder.glob(".*.tmp"))


def test_records_are_readable_as_the_umask_allows_not_private(small_config):
    import os

    record = run_job(small_config(), None, [], live=False, quiet=True)
    umask = os.umask(0)
    os.umask(umask)
    for name in (RECORD_FILE, CURVE_FILE):
        assert (home(record) / name).stat().st_mode & 0o777 == 0o666 & ~umask


def test_a_small_job_after_a_large_allocation_records_its_own_peak_memory(small_config):
    # proc(5): writing 5 to /proc/self/clear_refs resets the peak resident size (Linux 4.0+).
    import sys

    if not sys.platform.startswith("linux"):
        pytest.skip("the per-job reset needs Linux's /proc/self/clear_refs")
    from shiftbench.runtime import peak_memory_mb

    large = np.ones(600 * 2**20 // 8)  # 600 MiB touched, then freed before the job
    del large
    peak_before = peak_memory_mb()  # the process's mark, the large array included
    record = run_job(small_config("arch=fc"), None, [], live=False)
    assert record["peak_rss_scope"] == "job"
    assert record["peak_rss_mb"] < peak_before - 300


def stale_claim_test_target(small_config, tmp_path, seed):
    from shiftbench.config import validate
    from shiftbench.input_files import job_content
    from shiftbench.records import config_hash

    config = small_config(f"seed={seed}")
    target = tmp_path / "store" / config_hash(job_content(validate(config)))
    target.mkdir(parents=True)
    return config, target


def test_a_claim_whose_pid_now_names_another_process_is_taken_over(small_config, tmp_path):
    # proc(5): a pid is reused; with its start time (field 22 of /proc/PID/stat) it names one process.
    import os
    import socket

    from shiftbench.runtime import process_start

    if process_start(os.getppid()) is None:
        pytest.skip("needs /proc to read a process's start time")
    config, target = stale_claim_test_target(small_config, tmp_path, seed=9)
    claimant = {"host": socket.gethostname(), "pid": os.getppid(), "started": process_start(os.getppid()) + 1, "since": "then"}
    (target / "claim").write_text(json.dumps(claimant))
    record = run_job(config, None, [], live=False)
    assert record["status"] == "completed" and not (target / "claim").exists()


def test_a_claim_nobody_touched_for_the_limit_is_taken_over_even_from_a_live_pid(small_config, tmp_path):
    import os
    import socket
    import time

    from shiftbench.store import STALE_CLAIM_SECONDS

    config, target = stale_claim_test_target(small_config, tmp_path, seed=10)
    (target / "claim").write_text(json.dumps({"host": socket.gethostname(), "pid": os.getppid(), "since": "then"}))
    long_ago = time.time() - STALE_CLAIM_SECONDS - 60
    os.utime(target / "claim", (long_ago, long_ago))
    record = run_job(config, None, [], live=False)
    assert record["status"] == "completed"


def test_a_live_claim_says_who_holds_it(small_config, tmp_path):
    import os
    import socket

    config, target = stale_claim_test_target(small_config, tmp_path, seed=11)
    (target / "claim").write_text(json.dumps({"host": socket.gethostname(), "pid": os.getppid(), "since": "now"}))
    record = run_job(config, None, [], live=False)
    assert record["status"] == "claimed" and record["holder"].startswith(f"pid {os.getppid()} on {socket.gethostname()}")


def test_the_claim_is_touched_while_a_job_runs_however_long_its_epoch(tmp_path, monkeypatch):
    import os
    import time

    from shiftbench import store

    monkeypatch.setattr(store, "HEARTBEAT_SECONDS", 0.05)
    (tmp_path / "claim").write_text("{}")
    long_ago = time.time() - 3600
    os.utime(tmp_path / "claim", (long_ago, long_ago))
    with store.heartbeat(tmp_path):
        time.sleep(0.3)
    assert time.time() - (tmp_path / "claim").stat().st_mtime < 60


def test_a_home_that_is_a_symbolic_link_is_refused_and_its_target_left_alone(small_config, tmp_path):
    import os

    from shiftbench.errors import ConfigError

    config, target = stale_claim_test_target(small_config, tmp_path, seed=12)
    target.rmdir()
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / RECORD_FILE).write_text("keep me")
    os.symlink(elsewhere, target)
    with pytest.raises(ConfigError, match="the job's home is a symbolic link"):
        run_job(config, None, [], live=False)
    assert sorted(path.name for path in elsewhere.iterdir()) == [RECORD_FILE]
    assert (elsewhere / RECORD_FILE).read_text() == "keep me"


@pytest.mark.parametrize(("name", "make", "kind"), [
    ("record.json", lambda path: path.mkdir(), "a folder"),
    ("claim", lambda path: path.mkdir(), "a folder"),
    ("claim", lambda path: path.symlink_to(path.parent / "gone"), "a symbolic link"),
    ("weights.npz", lambda path: path.symlink_to("/etc/hostname"), "a symbolic link"),
])
def test_a_home_whose_files_are_folders_or_links_is_refused_in_one_line(small_config, tmp_path, name, make, kind):
    from shiftbench.errors import ConfigError

    config, target = stale_claim_test_target(small_config, tmp_path, seed=13)
    make(target / name)
    with pytest.raises(ConfigError, match=f"{name}: is {kind}; accepted: a plain file the job writes") as refused:
        run_job(config, None, [], live=False)
    assert "\n" not in str(refused.value)
    assert not (target / RECORD_FILE).is_file()


def test_a_read_only_home_is_refused_in_one_line_before_the_claim_and_a_finished_one_is_still_skipped(small_config, tmp_path, monkeypatch):
    # Permission bits do not bind root (the CI runs as root), so os.access stands in for a
    # read-only folder: what the job must do is ask before it writes.
    import os
    from pathlib import Path

    from shiftbench import store
    from shiftbench.errors import ConfigError

    config, target = stale_claim_test_target(small_config, tmp_path, seed=14)
    real_access = os.access
    monkeypatch.setattr(store.os, "access", lambda path, mode: False if Path(path) == target else real_access(path, mode))
    with pytest.raises(ConfigError, match=r"is not writable here, and the job's home .* must be written") as refused:
        run_job(config, None, [], live=False)
    assert "\n" not in str(refused.value) and not (target / "claim").exists()
    monkeypatch.setattr(store.os, "access", real_access)
    run_job(config, None, [], live=False)
    monkeypatch.setattr(store.os, "access", lambda path, mode: False if Path(path) == target else real_access(path, mode))
    assert run_job(config, None, [], live=False)["skipped"] is True


@pytest.mark.parametrize("family", ["graph_conv", "qda", "nearest"])
def test_a_record_holds_the_cpu_seconds_its_training_took_beside_the_wall_time(small_config, tmp_path, family):
    # time.process_time over the job's one torch thread: positive, and within the wall time
    # (plus the clock's tick) since one thread computes at a time (common practice, no source).
    record = run_job(small_config(f"arch={family}"), None, [], live=False, quiet=True)
    assert 0.0 < record["train_cpu_seconds"] <= record["train_seconds"] + 0.05
