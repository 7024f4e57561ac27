"""The memory estimate against measured peaks: each family at three sizes, one whole job per
fresh process (peak resident size is per process), with the command line's allocator settings.

``python -m benchmarks.memory`` writes ``results/benchmarks/memory.json`` and ``.md``: for every
case the estimate (``models.parameters.planned_memory``), the measured growth of the peak from
before the job, and their ratio (goal: between 1 and 1.5).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from datetime import datetime, timezone
from pathlib import Path

from benchmarks.measure import write_markdown_table
from shiftbench.records import write_atomic

ROOT = Path(__file__).resolve().parents[1]
# One job in this process: the peak's growth across it, and the estimate.
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
print(json.dumps({"status": record["status"], "parameters": plan.parameters, "measured": peak - before,
                  "planned": plan.total}))
"""
COMMON = ["data.samples_per_class=50", "train.epochs=2", "train.checkpoint_every=1"]
CASES = {
    "fc": [["arch=fc", f"arch.hidden=[{nodes}]", f"data.nodes={nodes}"] for nodes in (1000, 4000, 8000)],
    "line_conv": [["arch=line_conv", f"data.nodes={nodes}"] for nodes in (5000, 20000, 50000)],
    "graph_conv": [["arch=graph_conv", f"data.nodes={nodes}"] for nodes in (5000, 20000, 50000)],
}


def probe(overrides: list[str]) -> dict:
    """Run one job in a fresh process; its peak growth (bytes), the estimate, its status."""
    done = subprocess.run([sys.executable, "-c", PROBE, *overrides], capture_output=True, text=True, cwd=ROOT, timeout=600)
    if done.returncode != 0:
        raise RuntimeError(f"the memory probe failed for {' '.join(overrides)}:\n{done.stderr[-2000:]}")
    return json.loads(done.stdout.splitlines()[-1])


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.memory", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    rows = []
    for family, cases in CASES.items():
        for overrides in cases:
            result = probe([*overrides, *COMMON])
            rows.append({"family": family, "case": " ".join(overrides), **result, "ratio": result["planned"] / result["measured"]})
            print(f"{rows[-1]['case']}: planned {result['planned'] / 2**20:,.0f} MiB, measured "
                  f"{result['measured'] / 2**20:,.0f} MiB, ratio {rows[-1]['ratio']:.2f}", file=sys.stderr)
    facts = {"date": datetime.now(timezone.utc).strftime("%Y-%m-%d"), "machine": machine(), "common": COMMON, "cases": rows}
    write_atomic(arguments.out / "memory.json", json.dumps(facts, indent=2) + "\n")
    write_markdown_table(
        arguments.out / "memory.md", "Memory: the estimate that refuses jobs, against measured peaks",
        f"`python -m benchmarks.memory`, {facts['date']}; every case also sets `{' '.join(COMMON)}`. "
        "Measured: the growth of the peak resident size across one job in a fresh process. Goal: a ratio "
        "(estimate / measured) between 1 and 1.5.",
        {"family": "---", "case": "---", "parameters": "---:", "estimate MiB": "---:", "measured MiB": "---:", "ratio": "---:"},
        [[row["family"], f"`{row['case']}`", f"{row['parameters']:,}", f"{row['planned'] / 2**20:,.0f}",
          f"{row['measured'] / 2**20:,.0f}", f"{row['ratio']:.2f}"] for row in rows],
    )

if __name__ == "__main__":
    main()
