"""The memory estimate that refuses a job before it allocates, against the peaks jobs reach.

Each case runs one whole job in a fresh process (the peak resident size is per process) with
the command line's allocator settings, and compares the growth of its peak from before the job
with the estimate: the estimate must cover the peak without overstating it threefold (common
practice, no source: a refusal that errs, errs on the safe side, but not so far that it refuses
jobs that fit). Peaks vary with how much freed memory the heap happens to reuse: the same fc job
measured 22 to 45 bytes a parameter (2026-12-03)."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

PROBE = r"""
import json, os, resource, sys, tempfile
if hasattr(os, "sched_setaffinity"):  # the whole machine, as a job launched from a shell has it
    os.sched_setaffinity(0, range(os.cpu_count()))
from shiftbench.runtime import keep_freed_memory
keep_freed_memory()
from shiftbench.config import validate
from shiftbench.job import run_job
from shiftbench.models.parameters import planned_memory
from tests.conftest import composed

with tempfile.TemporaryDirectory() as folder:
    config = composed([*sys.argv[1:], f"results_dir={folder}"])
    run = validate(config)
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    record = run_job(config, None, [], live=False, quiet=True)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
plan = planned_memory(run.arch, run.data.nodes, 1, run.data.classes, run.train.batch_size, run.data.known_samples())
print(json.dumps({"status": record["status"], "measured": peak - before, "planned": plan.total}))
"""


@pytest.mark.parametrize(
    "case",
    [
        ["arch=fc", "arch.hidden=[4000]", "data.nodes=4000", "data.samples_per_class=50"],  # 16M parameters: the parameters dominate
        ["arch=graph_conv", "data.nodes=20000", "data.samples_per_class=50"],  # 1,200 parameters: the activations dominate
    ],
)
def test_the_memory_estimate_covers_a_jobs_measured_peak_without_overstating_it(case):
    root = Path(__file__).resolve().parents[2]
    done = subprocess.run([sys.executable, "-c", PROBE, *case, "train.epochs=2", "train.checkpoint_every=1"],
                          capture_output=True, text=True, cwd=root, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    result = json.loads(done.stdout.splitlines()[-1])
    assert result["status"] == "completed"
    assert result["measured"] <= result["planned"] <= 3 * result["measured"], result
