"""The decision study's wall time from an empty results folder, on the demo with the default
budgets, through the ``shiftbench-decide`` command as a user runs it; its verdict, table and
plots are kept as the README's example.

``python -m benchmarks.decision`` writes ``results/benchmarks/decision.{json,md}`` and copies
the study's ``verdict.md``, ``verdict.json`` and plots into ``results/decision/``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

from shiftbench.records import write_atomic

TOOL = Path(sys.executable).with_name("shiftbench-decide")
KEPT = ("verdict.md", "verdict.json", "units.csv", "pareto.png", "paired_differences.png", "tuning_curves.png")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.decision", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    parser.add_argument("--example", type=Path, default=Path("results/decision"))
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    facts = machine()
    with tempfile.TemporaryDirectory() as work:
        started = time.perf_counter()
        done = subprocess.run([str(TOOL), f"results_dir={work}"], capture_output=True, text=True)
        wall = time.perf_counter() - started
        if done.returncode != 0:
            raise SystemExit(f"shiftbench-decide failed:\n{done.stderr}")
        folder = Path(work) / "decision"
        arguments.example.mkdir(parents=True, exist_ok=True)
        for name in KEPT:
            if (folder / name).exists():
                shutil.copyfile(folder / name, arguments.example / name)
        verdict = json.loads((folder / "verdict.json").read_text())
    figures = {
        "date": datetime.now(timezone.utc).strftime("%Y-%m-%d"),
        "machine": {key: facts[key] for key in ("cpu", "cores", "torch")},
        "wall_seconds": wall,
        "candidates": len(verdict["candidates"]),
        "units": verdict["units"],
        "trials": {name: entry["trials"] for name, entry in verdict["tuning"].items()},
    }
    arguments.out.mkdir(parents=True, exist_ok=True)
    write_atomic(arguments.out / "decision.json", json.dumps(figures, indent=1) + "\n")
    write_atomic(arguments.out / "decision.md", "\n".join([
        "# The decision study's wall time",
        "",
        f"Measured {figures['date']} on {facts['cpu']}, {facts['cores']} cores, torch {facts['torch']} by "
        "`python -m benchmarks.decision`: `shiftbench-decide` from an empty results folder, demo scenario, "
        f"default budgets ({figures['candidates']} candidates, controls included, {max(figures['trials'].values())} "
        f"trials a tuning, {figures['units']} paired units): {wall / 60:.1f} minutes, one process (the study runs its "
        f"jobs one after another). Protocol: {verdict['protocol']}",
        "",
    ]))
    print(done.stdout)
    print(f"{wall / 60:.1f} min; wrote {arguments.out / 'decision.md'} and {arguments.example}", file=sys.stderr)


if __name__ == "__main__":
    main()
