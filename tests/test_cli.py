"""The command line, run as a user would: from a folder outside the project."""

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

BIN = Path(sys.executable).parent
FAST = ["data.samples_per_class=30", "data.nodes=24", "train.epochs=3"]


def run(command: str, *arguments: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [str(BIN / command), *arguments], cwd=cwd, capture_output=True, text=True, timeout=300
    )


def records_under(folder: Path) -> list[dict]:
    """The records below ``folder`` or pointed at by its launch manifest."""
    from shiftbench.records import find_records

    return [json.loads(path.read_text()) for path in find_records([folder])]


@pytest.mark.parametrize(
    ("arguments", "family", "order"),
    [
        (["arch=line_conv", "arch.order=4", "seed=2"], "line_conv", 4),
    ],
)
def test_single_jobs_run_from_any_folder_and_write_a_record_in_the_store(tmp_path, arguments, family, order):
    result = run("shiftbench", *FAST, *arguments, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    (record,) = records_under(tmp_path / "results")
    assert (record["status"], record["family"], record["order"]) == ("completed", family, order)
    assert result.stdout.splitlines()[-1].startswith(f"{family} on sensor_regimes, graph ")
    assert [path.name for path in (tmp_path / "results").iterdir()] == ["store"]
    again = run("shiftbench", *FAST, *arguments, cwd=tmp_path)
    assert again.stdout.startswith("skipped (already completed, record in ") and len(records_under(tmp_path / "results")) == 1


def test_real_and_user_data_run_from_any_folder(tmp_path):
    rng = np.random.default_rng(0)
    signals = rng.standard_normal((60, 10))
    np.savez(tmp_path / "X.npz", signals=signals, labels=(signals[:, :5].sum(axis=1) > 0).astype(int))
    edges = "".join(f"{i},{i + 1}\n{i + 1},{i}\n" for i in range(9))
    (tmp_path / "G.csv").write_text("source,target\n" + edges)
    # digits and GunPoint through the job runner are in tests/data; here, the user's files and a
    # published figure through a real process.
    commands = [
        ["data=file", "data.path=X.npz", "graph=file", "graph.path=G.csv", "train.epochs=2"],
        ["data=ucr", "data.name=ItalyPowerDemand", "arch=nearest"],
    ]
    for arguments in commands:
        result = run("shiftbench", *arguments, cwd=tmp_path)
        assert result.returncode == 0, result.stderr
    records = records_under(tmp_path / "results")
    assert sorted(r["data"] for r in records) == ["ItalyPowerDemand", "X"]
    assert all(r["status"] == "completed" for r in records)
    (nearest,) = [r for r in records if r["family"] == "nearest"]
    assert nearest["parameters"] == 0 and round(1 - nearest["test_accuracy"], 4) == 0.0447


def test_a_bad_data_file_stops_before_any_job(tmp_path):
    np.savez(tmp_path / "X.npz", signals=np.zeros((30, 4)), labels=np.zeros(30, dtype=int))
    result = run("shiftbench", "-m", "data=file", "data.path=X.npz", "seed=0,1", cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr == "shiftbench: error: data.path='X.npz': labels hold a single class ('0'); accepted: at least 2 classes\n"
    assert not (tmp_path / "results").exists()


def test_a_sweep_writes_one_record_per_job_and_the_report_tabulates_them(tmp_path):
    result = run("shiftbench", "-m", "arch=fc,line_conv,graph_conv", "seed=0,1,2", *FAST, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    (launch,) = (tmp_path / "results" / "sweeps").iterdir()
    records = records_under(launch)
    assert len(records) == 9 and all(r["status"] == "completed" for r in records)
    progress = [line for line in result.stdout.splitlines() if re.match(r"\[\d+/\d+\] ", line)]
    assert [line.split("]")[0] for line in progress] == [f"[{k}/9" for k in range(1, 10)]
    assert "sweep done: 9 completed, 0 skipped, 0 failed" in result.stdout

    report = run("shiftbench-report", str(launch), "--out", "tables", cwd=tmp_path)
    assert report.returncode == 0, report.stderr
    table = pd.read_csv(tmp_path / "tables" / "summary.csv")
    assert sorted(table["family"]) == ["fc", "graph_conv", "line_conv"]
    assert list(table["seeds"]) == [3, 3, 3]


def test_the_families_study_and_the_claims_on_the_users_own_data_and_graph(tmp_path):
    from examples.own_files import write_own_files  # a graph and signals that are not the demo

    write_own_files(tmp_path, per_class=40)
    arguments = ["-m", "+experiment=families", "data=file", "data.path=signals.csv", "data.graph=roads.csv", "train.epochs=20"]
    result = run("shiftbench", *arguments, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    assert "note:" not in result.stderr  # no two rows of the study are one configuration
    assert "sweep done: 30 completed, 0 skipped, 0 failed" in result.stdout

    study = tmp_path / "results" / "families"
    report = run("shiftbench-report", str(study), cwd=tmp_path)
    assert report.returncode == 0, report.stderr
    table = pd.read_csv(study / "summary.csv")
    assert len(table) == 10 and set(table["seeds"]) == {3}  # every row of the study kept
    assert "near chance" not in report.stdout  # no family at chance beside a better one
    best = table.groupby(["family", "graph"])["test_accuracy_mean"].max()
    assert best[("graph_conv", "native: roads.csv")] > best[("graph_conv", "rewired")]  # the control scores lower
    assert best[("graph_conv", "native: roads.csv")] > best[("graph_conv", "line")]

    claims = run("shiftbench-claims", str(study), "--seeds", "1", cwd=tmp_path)
    assert claims.returncode == 0, claims.stderr
    written = json.loads((study / "claims.json").read_text())
    subject = written["analyses"]["subject"]
    assert (subject["data"], subject["graph"], subject["graph_source"]) == ("signals", "roads.csv", "native")
    assert subject["from"] == f"the records under {study}"
    verdicts = {claim["id"]: claim for claim in written["claims"]}
    assert verdicts["graph_matters"]["verdict"] in ("holds", "holds_with_caveat")
    assert "one node count" in verdicts["parameters_vs_nodes"]["evidence"]["run"]


# One case through a real process; tests/bad_inputs runs the whole corpus through the entry point in-process.
@pytest.mark.parametrize("arguments", [["-m", "arch.order=2,-1"]])
def test_a_bad_config_prints_one_line_exits_2_and_writes_nothing(tmp_path, arguments):
    result = run("shiftbench", *arguments, cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr.count("\n") == 1 and "Traceback" not in result.stderr
    assert result.stderr.startswith("shiftbench: error: ")
    assert not (tmp_path / "results").exists()


@pytest.mark.parametrize("command", ["shiftbench", "shiftbench-decide"])
def test_a_run_from_the_source_folder_must_name_its_results_dir(command):
    root = Path(__file__).resolve().parents[1]
    before = sorted(path for path in (root / "results").rglob("*"))
    result = run(command, "train.epochs=1", cwd=root)
    assert result.returncode == 2 and result.stderr.count("\n") == 1
    assert result.stderr.startswith("shiftbench: error: results_dir=results: run from the shiftbench source folder")
    assert sorted(path for path in (root / "results").rglob("*")) == before


def test_report_on_a_folder_without_records_is_a_one_line_error(tmp_path):
    result = run("shiftbench-report", str(tmp_path), cwd=tmp_path)
    assert result.returncode == 2
    assert result.stderr.strip() == f"shiftbench-report: error: no records (record.json) found under {tmp_path}"


@pytest.mark.parametrize(("launcher", "families", "jobs"), [("joblib", "fc,line_conv,graph_conv", 3), ("submitit_local", "fc,graph_conv", 2)])
def test_parallel_launchers_write_every_record_and_a_rerun_trains_nothing(tmp_path, launcher, families, jobs):
    arguments = ["-m", f"arch={families}", "seed=0", *FAST, f"hydra/launcher={launcher}",
                 "hydra.sweep.dir=results/sweep"]
    if launcher == "joblib":
        arguments.append("hydra.launcher.n_jobs=2")
    result = run("shiftbench", *arguments, cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    from shiftbench.records import find_records

    files = find_records([tmp_path / "results" / "sweep"])
    assert len(files) == jobs and all(json.loads(path.read_text())["status"] == "completed" for path in files)
    assert all(f"[{count}/{jobs}] " in result.stdout for count in range(1, jobs + 1))  # a line per job, submitit too
    if launcher == "joblib":  # parallel jobs share the terminal (submitit's write their own log files)
        epoch_lines = [line for line in result.stdout.splitlines() if "train loss" in line]
        assert epoch_lines and all(re.match(r"\[job \d+\] epoch ", line) for line in epoch_lines)
        # The same config under the basic launcher gives the same figures (one thread a job in both).
        basic = run("shiftbench", "-m", "arch=graph_conv", "seed=0", *FAST, "results_dir=basic", cwd=tmp_path)
        assert basic.returncode == 0, basic.stderr
        (alone,) = records_under(tmp_path / "basic" / "store")
        (parallel,) = [json.loads(path.read_text()) for path in files if json.loads(path.read_text())["family"] == "graph_conv"]
        figures = ("test_accuracy", "test_loss", "best_epoch", "torch_threads")
        assert [alone[key] for key in figures] == [parallel[key] for key in figures]
    stamps = [path.stat().st_mtime_ns for path in files]
    rerun = run("shiftbench", *arguments, cwd=tmp_path)
    assert rerun.returncode == 0, rerun.stderr
    assert f"sweep done: 0 completed, {jobs} skipped, 0 failed" in rerun.stdout
    assert [path.stat().st_mtime_ns for path in files] == stamps


@pytest.mark.parametrize(("launcher", "signal_name"), [("basic", "SIGKILL"), ("joblib", "SIGKILL"), ("basic", "SIGINT")])
def test_a_sweep_killed_mid_job_finishes_on_rerun_without_retraining_what_was_done(tmp_path, launcher, signal_name):
    import os
    import signal
    import time

    sweep = tmp_path / "results" / "store"
    # An ad-hoc sweep with no fixed folder: relaunched, it gets a new launch folder, and the
    # store still knows what was done.
    arguments = ["-m", "arch=fc,line_conv,graph_conv", "data.samples_per_class=40", "data.nodes=24",
                 "train.epochs=100", "train.patience=100", "train.checkpoint_every=1"]
    if launcher == "joblib":
        arguments += ["hydra/launcher=joblib", "hydra.launcher.n_jobs=2"]
    # Ctrl-C reaches a foreground process, whose SIGINT is at its default; the suite itself may
    # run as a background job, for which bash ignores SIGINT, and children inherit that.
    process = subprocess.Popen([str(BIN / "shiftbench"), *arguments], cwd=tmp_path, start_new_session=True,
                               stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                               preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + 120
    while True:
        # Checkpoints first, records after: a job whose checkpoint was there and whose record was
        # not yet, a moment later, is still training. Killed while one job is done, another still
        # waits, so the signal cannot land as the sweep ends.
        started = {path.parent for path in sweep.rglob("checkpoint.pt")}
        done = {path.parent for path in sweep.rglob("record.json")}
        if len(done) == 1 and started - done:
            break
        assert process.poll() is None, "the sweep ended before it could be killed mid-job"
        assert time.monotonic() < deadline
        time.sleep(0.01)
    os.killpg(process.pid, getattr(signal, signal_name))
    _, stderr = process.communicate(timeout=60)
    if signal_name == "SIGINT":  # Ctrl-C: one line saying how to go on, no traceback
        assert process.returncode == 130
        assert stderr.strip().splitlines()[-1].startswith("shiftbench: interrupted; run the same command again")
        assert "Traceback" not in stderr
    finished = {path: path.read_bytes() for path in sweep.rglob("record.json")}

    rerun = run("shiftbench", *arguments, cwd=tmp_path)
    assert rerun.returncode == 0, rerun.stderr
    records = {path: json.loads(path.read_text()) for path in sweep.rglob("record.json")}
    assert len(records) == 3 and all(record["status"] == "completed" for record in records.values())
    assert {path: path.read_bytes() for path in finished} == finished  # not retrained, not rewritten
    resumed = [record for path, record in records.items() if path not in finished and "resumed_from_epoch" in record]
    assert resumed and all(record["resumed_from_epoch"] >= 2 for record in resumed)
    assert not list(sweep.rglob("checkpoint.pt"))


def test_two_identical_sweeps_at_once_train_each_config_once(tmp_path):
    common = ["-m", "arch=fc,line_conv,graph_conv", *FAST, "train.epochs=15"]
    sweeps = [subprocess.Popen([str(BIN / "shiftbench"), *common], cwd=tmp_path, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True) for _ in range(2)]
    outputs = [process.communicate(timeout=300) for process in sweeps]
    assert all(process.returncode == 0 for process in sweeps), outputs
    from shiftbench.records import read_manifest

    outcomes = [entry["outcome"] for launch in (tmp_path / "results" / "sweeps").iterdir() for entry in read_manifest(launch)]
    assert len(list((tmp_path / "results" / "store").rglob("record.json"))) == 3
    # Each config trained by one launch; the other skipped it, done or claimed by the first.
    assert sorted(outcomes) == sorted(["trained"] * 3 + [outcome for outcome in outcomes if outcome != "trained"])
    assert outcomes.count("trained") == 3 and len(outcomes) == 6


def test_two_sweeps_writing_one_study_folder_and_a_report_reading_it_meanwhile_see_only_whole_records(tmp_path):
    import time

    from shiftbench.records import load_records

    sweep = tmp_path / "results" / "shared"
    common = ["-m", "arch=fc,line_conv,graph_conv", *FAST, "train.epochs=20", "train.checkpoint_every=1",
              "hydra.sweep.dir=results/shared"]
    sweeps = [subprocess.Popen([str(BIN / "shiftbench"), *common, f"seed={seed}"], cwd=tmp_path,
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for seed in (0, 1)]
    reads = 0
    while any(process.poll() is None for process in sweeps):
        if sweep.is_dir():
            frame = load_records([sweep])
            assert frame.attrs["skipped"] == []  # never half a file
            assert len(frame) == 0 or set(frame["status"]) == {"completed"}
            reads += 1
        time.sleep(0.02)
    outputs = [process.communicate() for process in sweeps]
    assert all(process.returncode == 0 for process in sweeps), outputs
    assert all("sweep done: 3 completed, 0 skipped, 0 failed" in out for out, _ in outputs)
    frame = load_records([sweep])
    assert reads > 0 and len(frame) == 6 and sorted(frame["seed"]) == [0, 0, 0, 1, 1, 1]


def test_a_single_run_whose_job_failed_exits_1_after_its_summary_line(tmp_path):
    # A script running one job must see the failure (common practice, no source): QDA on more
    # features than samples per class fails every value of its grid.
    result = run("shiftbench", "arch=qda", "data.nodes=32", "data.samples_per_class=40", cwd=tmp_path)
    assert result.returncode == 1
    assert "FAILED: FloorFailed: every value of qda's reg_param failed" in result.stdout
    assert "Traceback" not in result.stdout + result.stderr
