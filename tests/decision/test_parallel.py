"""The decision study's jobs through the launchers a sweep uses: the same figures bit for bit
with parallel workers, and two studies on one results folder train each config once."""

import json
import subprocess
import sys
from collections import Counter
from pathlib import Path

import pandas as pd
import pytest

from shiftbench.cli import CONFIG_DIR
from shiftbench.decision_study import run_study
from shiftbench.errors import ConfigError
from tests.decision.test_study import FC_VS_QDA, SMALL, planted_file

FIGURES = ["candidate", "split", "seed", "test_accuracy", "val_accuracy", "parameters"]


def study(tmp_path: Path, data: Path, *launcher: str) -> pd.DataFrame:
    arguments = [f"results_dir={tmp_path}", "data=file", f"data.path={data}", *SMALL, FC_VS_QDA, *launcher]
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    return pd.read_csv(tmp_path / "decision" / "units.csv")


def test_two_joblib_workers_give_the_figures_of_one_process_bit_for_bit(tmp_path):
    # Every job computes on one torch thread wherever it runs, and each tuning asks and tells in
    # the same order however many jobs run at once.
    data = planted_file(tmp_path / "data.npz")
    alone = study(tmp_path / "basic", data)
    parallel = study(tmp_path / "joblib", data, "hydra/launcher=joblib", "hydra.launcher.n_jobs=2")
    pd.testing.assert_frame_equal(alone[FIGURES], parallel[FIGURES])
    written = json.loads((tmp_path / "joblib" / "decision" / "verdict.json").read_text())
    assert (written["launcher"], written["workers"]) == ("JoblibLauncher", 2)


def test_two_studies_on_one_results_folder_train_each_config_once_and_agree_with_one_alone(tmp_path):
    data = planted_file(tmp_path / "data.npz")
    command = [str(Path(sys.executable).with_name("shiftbench-decide")), f"results_dir={tmp_path / 'shared'}", "data=file",
               f"data.path={data}", *SMALL, FC_VS_QDA]
    studies = [subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    outputs = [process.communicate(timeout=300) for process in studies]
    assert [process.returncode for process in studies] == [0, 0], outputs
    launches = [json.loads(line) for line in (tmp_path / "shared" / "decision" / "jobs.jsonl").read_text().splitlines()]
    trained = Counter(entry["config_hash"] for entry in launches if entry["outcome"] == "trained")
    assert trained and max(trained.values()) == 1
    assert set(trained) == {entry["config_hash"] for entry in launches}  # every config trained, by one of the two
    assert outputs[0][0].split("# Verdict")[1] == outputs[1][0].split("# Verdict")[1]
    alone = study(tmp_path / "alone", data)  # the same study, uninterrupted and by itself
    pd.testing.assert_frame_equal(pd.read_csv(tmp_path / "shared" / "decision" / "units.csv")[FIGURES], alone[FIGURES])


def test_a_launcher_that_does_not_exist_is_refused_before_any_job(tmp_path):
    with pytest.raises(ConfigError, match="hydra/launcher='nope' is not accepted; accepted: one of basic, joblib"):
        run_study([f"results_dir={tmp_path}", "hydra/launcher=nope"], CONFIG_DIR)
    assert not (tmp_path / "store").exists()


def test_ctrl_c_in_the_study_is_one_line_and_status_130_and_the_rerun_goes_on(tmp_path):
    # SIGINT restored in the child: a job started from a non-interactive shell inherits it ignored.
    import os
    import signal
    import time

    data = planted_file(tmp_path / "data.npz")
    command = [str(Path(sys.executable).with_name("shiftbench-decide")), f"results_dir={tmp_path / 'cut'}", "data=file",
               f"data.path={data}", *SMALL, FC_VS_QDA, "hydra/launcher=joblib", "hydra.launcher.n_jobs=2"]
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, start_new_session=True,
                               preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    deadline = time.monotonic() + 120
    while not list((tmp_path / "cut" / "store").glob("*/record.json")):
        assert process.poll() is None and time.monotonic() < deadline, "the study ended before it could be cut"
        time.sleep(0.05)
    os.killpg(process.pid, signal.SIGINT)
    _, stderr = process.communicate(timeout=60)
    assert process.returncode == 130 and "Traceback" not in stderr
    assert stderr.strip().splitlines() == [
        "shiftbench-decide: interrupted; run the same command again to go on: finished jobs are kept and skipped, "
        "an interrupted one resumes from its last checkpoint"]
    rerun = subprocess.run(command, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    assert (tmp_path / "cut" / "decision" / "verdict.md").is_file()


def test_submitits_local_executor_gets_a_cores_worth_of_jobs_at_a_time(tmp_path, monkeypatch):
    # submitit's LocalExecutor starts a process for every job it is handed; a study's batch of
    # units must not become that many processes at once.
    from hydra import initialize_config_dir

    from shiftbench.batch import BatchRunner
    from shiftbench.config_store import register_defaults
    from shiftbench.runtime import available_cores

    register_defaults()
    with initialize_config_dir(str(CONFIG_DIR.resolve()), version_base="1.3", job_name="shiftbench"):
        runner = BatchRunner(["hydra/launcher=submitit_local"], tmp_path, say=lambda line: None)
    handed: list[int] = []

    class Returned:
        def __init__(self, overrides):
            self.return_value = {"status": "completed", "overrides": overrides}

    monkeypatch.setattr(runner.launcher, "launch", lambda batch, initial_job_idx: handed.append(len(batch)) or [Returned(b) for b in batch])
    records = runner([[f"seed={seed}"] for seed in range(7)])
    assert runner.workers == available_cores() and max(handed) <= available_cores() and sum(handed) == 7
    assert [record["overrides"] for record in records] == [[f"seed={seed}"] for seed in range(7)]
