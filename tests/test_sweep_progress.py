"""Sweep progress: job counting, the shared progress file, and the lines printed."""

import json
import os

from shiftbench.sweep_axes import count_jobs
from shiftbench.sweep_progress import append_line, job_line, read_progress, tally_line

HEADER = {"total": 3, "started": 100.0}
FINISHED = [
    {"status": "completed", "family": "fc", "data": "digits", "metric": "accuracy", "test_score": 0.9},
    {"status": "skipped", "family": "fc", "data": "digits", "metric": "accuracy", "test_score": 0.9},
    {"status": "failed", "family": "graph_conv", "data": "digits", "metric": "accuracy", "test_score": None},
]


def test_jobs_are_the_product_of_the_axes_with_command_line_axes_replacing_the_studys():
    study = {"+experiment/setups": "a,b,c,d,e", "seed": "0,1,2"}
    assert count_jobs(["arch.order=1,2"], study) == 5 * 3 * 2
    assert count_jobs(["seed=0,1,2,3,4"], study) == 5 * 5
    assert count_jobs(["seed=range(4)", "train.epochs=3"], {}) == 4


def test_progress_file_keeps_the_header_and_every_appended_job(tmp_path):
    path = tmp_path / "progress.jsonl"
    path.write_text(json.dumps(HEADER) + "\n")
    for entry in FINISHED:
        append_line(path, entry)
    assert read_progress(path) == (HEADER, FINISHED)


def test_job_line_shows_place_result_elapsed_and_time_left():
    assert job_line(HEADER, FINISHED[:1], now=110.0) == (
        "[1/3] fc on digits: test accuracy 0.900 (completed), elapsed 10s, left ~20s"
    )
    assert job_line(HEADER, FINISHED, now=190.0).startswith("[3/3] graph_conv on digits: failed (failed)")


def test_tally_counts_completed_skipped_and_failed():
    assert tally_line(HEADER, FINISHED, now=230.0) == "sweep done: 1 completed, 1 skipped, 1 failed in 2m10s"


def test_a_line_cut_short_by_a_kill_is_passed_over(tmp_path):
    from shiftbench.sweep_progress import read_progress

    path = tmp_path / ".progress.jsonl"
    path.write_text('{"total": 3, "started": 0}\n{"status": "completed"}\n{"status": "compl')
    header, finished = read_progress(path)
    assert header["total"] == 3 and finished == [{"status": "completed"}]


def test_progress_files_of_killed_sweeps_on_this_host_are_removed(tmp_path):
    import socket
    import subprocess
    import sys

    from shiftbench.sweep_progress import remove_dead_progress

    ended = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    host = socket.gethostname()
    dead = tmp_path / f".progress.{host}-{ended.stdout.strip()}-1.jsonl"
    alive = tmp_path / f".progress.{host}-{os.getpid()}-2.jsonl"
    elsewhere = tmp_path / f".progress.other-host-{ended.stdout.strip()}-3.jsonl"
    for path in (dead, alive, elsewhere):
        path.write_text('{"total": 2, "started": 0}\n')
    remove_dead_progress(tmp_path)
    assert sorted(path.name for path in tmp_path.iterdir()) == sorted([alive.name, elsewhere.name])
