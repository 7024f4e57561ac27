"""The decision study's wall time from an empty results folder, on the demo with the default
budgets, through the ``shiftbench-decide`` command as a user runs it: in one process, with
two joblib workers (``hydra/launcher=joblib hydra.launcher.n_jobs=2``) and through submitit's
local executor (a process per job, a core's worth at a time, as on a cluster), side by side in one run,
with whether the two give the same figures and the time a job adds beyond its training. The
one-process study's verdict, table and plots are kept as the README's example.

``python -m benchmarks.decision`` writes ``results/benchmarks/decision.{json,md}`` and copies
the study's ``verdict.md``, ``verdict.json``, ``units.csv`` and plots into ``results/decision/``.
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

import pandas as pd

from shiftbench.records import write_atomic

TOOL = Path(sys.executable).with_name("shiftbench-decide")
KEPT = ("verdict.md", "verdict.json", "units.csv", "pareto.png", "paired_differences.png", "tuning_curves.png")
FIGURES = ["candidate", "split", "seed", "test_accuracy", "val_accuracy", "parameters"]
WAYS = {"one process": [], "two joblib workers": ["hydra/launcher=joblib", "hydra.launcher.n_jobs=2"],
        "submitit's local executor": ["hydra/launcher=submitit_local"]}


def one_study(work: Path, launcher: list[str]) -> dict:
    """Run the default study into ``work``; its wall time, units and the store's job figures."""
    started = time.perf_counter()
    done = subprocess.run([str(TOOL), f"results_dir={work}", *launcher], capture_output=True, text=True)
    wall = time.perf_counter() - started
    if done.returncode != 0:
        raise SystemExit(f"shiftbench-decide {' '.join(launcher)} failed:\n{done.stderr}")
    records = [json.loads(path.read_text()) for path in (work / "store").rglob("record.json")]
    return {"wall": wall, "stdout": done.stdout, "units": pd.read_csv(work / "decision" / "units.csv"),
            "jobs": len(records), "train_seconds": sum(record.get("train_seconds") or 0.0 for record in records)}


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.decision", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    parser.add_argument("--example", type=Path, default=Path("results/decision"))
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    facts = machine()
    runs = {}
    with tempfile.TemporaryDirectory() as work:
        for name, launcher in WAYS.items():
            runs[name] = one_study(Path(work) / name.replace(" ", "_").replace("'", ""), launcher)
            print(f"{name}: {runs[name]['wall'] / 60:.1f} min", file=sys.stderr)
        folder = Path(work) / "one_process" / "decision"
        arguments.example.mkdir(parents=True, exist_ok=True)
        for name in KEPT:
            if (folder / name).exists():
                shutil.copyfile(folder / name, arguments.example / name)
        verdict = json.loads((folder / "verdict.json").read_text())
    alone, parallel = runs["one process"], runs["two joblib workers"]
    same = all(alone["units"][FIGURES].equals(run["units"][FIGURES]) for run in runs.values())
    overhead = (alone["wall"] - alone["train_seconds"]) / alone["jobs"]
    figures = {
        "date": datetime.now(timezone.utc).strftime("%Y-%m-%d"),
        "machine": {key: facts[key] for key in ("cpu", "cores", "torch")},
        "wall_seconds": {name: run["wall"] for name, run in runs.items()},
        "speedup_two_workers": alone["wall"] / parallel["wall"],
        "same_figures": same,
        "jobs": alone["jobs"],
        "seconds_per_job_beyond_training": overhead,
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
        f"trials a tuning, {figures['units']} paired units, {figures['jobs']} jobs).",
        "",
        "| jobs run | wall time | speed-up |",
        "| --- | ---: | ---: |",
        *(f"| {name} (`{' '.join(WAYS[name]) or 'hydra/launcher=basic'}`) | {run['wall'] / 60:.1f} min | "
          f"{alone['wall'] / run['wall']:.2f}x |" for name, run in runs.items()),
        "",
        f"The {len(runs)} give {'the same' if same else 'different'} figures (test and validation figure and parameter count "
        f"of every unit, compared exactly). Time a job adds beyond its training (loading, evaluation, records; one "
        f"process): {overhead:.2f} s.",
        "",
        f"Protocol: {verdict['protocol']}",
        "",
    ]))
    print(alone["stdout"])
    print(f"wrote {arguments.out / 'decision.md'} and {arguments.example}", file=sys.stderr)


if __name__ == "__main__":
    main()
