"""Sweep progress: job counting and the per-job and closing lines."""

from types import SimpleNamespace

from shiftbench.preflight import count_jobs
from shiftbench.sweep_progress import SweepProgress


def test_jobs_are_the_product_of_the_axes_with_command_line_axes_replacing_the_studys():
    study = {"+experiment/setups": "a,b,c,d,e", "seed": "0,1,2"}
    assert count_jobs(["arch.order=1,2"], study) == 5 * 3 * 2
    assert count_jobs(["seed=0,1,2,3,4"], study) == 5 * 5
    assert count_jobs(["seed=range(4)", "train.epochs=3"], {}) == 4


def test_each_finished_job_prints_its_place_and_the_end_prints_the_tally(capsys):
    progress = SweepProgress()
    progress.total, progress.started = 3, 0.0
    for outcome in (
        {"status": "completed", "family": "fc", "data": "digits", "test_accuracy": 0.9},
        {"status": "completed", "skipped": True, "family": "fc", "data": "digits", "test_accuracy": 0.9},
        {"status": "failed", "family": "graph_conv", "data": "digits", "test_accuracy": None},
    ):
        progress.on_job_end(None, SimpleNamespace(return_value=outcome))
    progress.on_multirun_end(None)
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("[1/3] fc on digits: test accuracy 0.900 (completed)")
    assert lines[1].startswith("[2/3] fc on digits: test accuracy 0.900 (skipped)")
    assert lines[2].startswith("[3/3] graph_conv on digits: failed (failed)")
    assert lines[3].startswith("sweep done: 1 completed, 1 skipped, 1 failed")
