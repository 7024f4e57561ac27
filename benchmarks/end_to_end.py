"""End-to-end figures, through the command line as a user runs it: seconds per epoch of each
family on the demo at its defaults, and at 4,096 and 16,384 nodes idle and beside a busy process;
the families study's wall time and its overhead a job beyond training; graph_conv at 100,000
nodes with its peak memory.

``python -m benchmarks.end_to_end`` writes ``results/benchmarks/end_to_end.json`` and ``.md``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

import pandas as pd

from benchmarks.measure import busy_competitor
from shiftbench.records import load_records, write_atomic

FAMILIES = ("fc", "line_conv", "graph_conv")
EPOCHS = 5
SIZES = (4096, 16384)
# The demo at a size: fewer samples, so that an epoch at 16,384 nodes takes seconds, not minutes.
AT_SIZE = ["data.samples_per_class=50", "train.epochs=2", "train.patience=2"]
LARGE = ["data.nodes=100000", "arch=graph_conv", "arch.order=4", "arch.channels=[16,16]",
         "train.batch_size=32", "train.epochs=2", "train.patience=2"]
TOOL = Path(sys.executable).with_name("shiftbench")


def shiftbench(arguments: list[str]) -> float:
    """Run the tool with ``arguments``; its wall time in seconds."""
    started = time.perf_counter()
    done = subprocess.run([str(TOOL), *arguments], capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"shiftbench {' '.join(arguments)} failed:\n{done.stderr}")
    return time.perf_counter() - started


def epoch_seconds(folder: Path) -> list[float]:
    """The seconds of every epoch in the curves under ``folder``."""
    return [float(value) for path in folder.rglob("curve.csv") for value in pd.read_csv(path)["seconds"]]


def measure(work: Path) -> dict:
    figures: dict = {"date": datetime.now(timezone.utc).strftime("%Y-%m-%d"), "families": {}}
    for family in FAMILIES:
        folder = work / family
        shiftbench([f"arch={family}", f"train.epochs={EPOCHS}", f"train.patience={EPOCHS}", f"results_dir={folder}"])
        seconds = epoch_seconds(folder)
        figures["families"][family] = {"median_epoch_seconds": statistics.median(seconds), "epochs": len(seconds)}
        print(f"{family}: {figures['families'][family]['median_epoch_seconds']:.3f} s an epoch", file=sys.stderr)
    figures["sizes"] = sized_epochs(work)
    study = work / "study"
    wall = shiftbench(["-m", "+experiment=families", f"results_dir={study}"])
    records = load_records([study / "families"])
    training = float(records["train_seconds"].sum())
    figures["families_study"] = {
        "jobs": len(records), "wall_seconds": wall, "train_seconds": training,
        "overhead_seconds_a_job": (wall - training) / len(records),
    }
    print(f"families study: {wall:.1f} s for {len(records)} jobs", file=sys.stderr)
    large = work / "large"
    wall = shiftbench([*LARGE, f"results_dir={large}"])
    (record,) = load_records([large]).to_dict("records")
    figures["large"] = {
        "overrides": LARGE, "wall_seconds": wall, "peak_rss_mb": record["peak_rss_mb"],
        "median_epoch_seconds": statistics.median(epoch_seconds(large)), "test_accuracy": record["test_accuracy"],
    }
    print(f"100,000 nodes: peak RSS {record['peak_rss_mb']:.0f} MiB", file=sys.stderr)
    return figures


def sized_epochs(work: Path) -> list[dict]:
    """Seconds an epoch of each family at each of :data:`SIZES` nodes, idle and beside a busy
    process (:func:`benchmarks.measure.busy_competitor`)."""
    rows = []
    for nodes in SIZES:
        for family in FAMILIES:
            row = {"nodes": nodes, "family": family}
            for condition in ("idle", "busy"):
                folder = work / f"{family}-{nodes}-{condition}"
                with busy_competitor(condition == "busy"):
                    shiftbench([f"arch={family}", f"data.nodes={nodes}", *AT_SIZE, f"results_dir={folder}"])
                row[condition] = statistics.median(epoch_seconds(folder))
            rows.append(row)
            print(f"{family} at {nodes} nodes: {row['idle']:.2f} s an epoch idle, {row['busy']:.2f} s busy", file=sys.stderr)
    return rows


def write_markdown(figures: dict, machine: str, path: Path) -> None:
    study, large = figures["families_study"], figures["large"]
    lines = [
        "# End-to-end figures",
        "",
        f"Measured {figures['date']} on {machine} by `make bench` (`python -m benchmarks.end_to_end`), "
        "through the `shiftbench` command, as a user runs it.",
        "",
        "| family (demo, defaults) | seconds an epoch |",
        "|---|---|",
        *[f"| {name} | {entry['median_epoch_seconds']:.3f} |" for name, entry in figures["families"].items()],
        "",
        f"Families study (`shiftbench -m +experiment=families`, basic launcher): {study['jobs']} jobs in "
        f"{study['wall_seconds']:.1f} s, of which {study['train_seconds']:.1f} s training; overhead beyond "
        f"training {study['overhead_seconds_a_job']:.2f} s a job (process start, config checks, data, records).",
        "",
        f"At a size (`{' '.join(AT_SIZE)}`), seconds an epoch idle and beside a busy process (one competitor "
        "multiplying matrices on one thread); targets: graph_conv at most 2x line_conv at the same size, busy at "
        "most 2.5x idle.",
        "",
        "| nodes | family | idle | busy | busy / idle | / line_conv (idle) |",
        "|---|---|---|---|---|---|",
        *[f"| {row['nodes']:,} | {row['family']} | {row['idle']:.2f} | {row['busy']:.2f} | {row['busy'] / row['idle']:.2f}x | "
          f"{row['idle'] / line_conv_idle(figures['sizes'], row['nodes']):.2f}x |" for row in figures["sizes"]],
        "",
        f"graph_conv at 100,000 nodes (`{' '.join(large['overrides'])}`): peak RSS "
        f"{large['peak_rss_mb']:,.0f} MiB, {large['median_epoch_seconds']:.1f} s an epoch, "
        f"{large['wall_seconds']:.0f} s in all.",
        "",
    ]
    write_atomic(path, "\n".join(lines))


def line_conv_idle(rows: list[dict], nodes: int) -> float:
    return next(row["idle"] for row in rows if row["nodes"] == nodes and row["family"] == "line_conv")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.end_to_end", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    facts = machine()
    with tempfile.TemporaryDirectory() as work:
        figures = measure(Path(work))
    figures["machine"] = {key: facts[key] for key in ("cpu", "cores", "torch")}
    arguments.out.mkdir(parents=True, exist_ok=True)
    write_atomic(arguments.out / "end_to_end.json", json.dumps(figures, indent=1) + "\n")
    write_markdown(figures, f"{facts['cpu']}, {facts['cores']} cores, torch {facts['torch']}", arguments.out / "end_to_end.md")
    print(f"wrote {arguments.out / 'end_to_end.json'} and {arguments.out / 'end_to_end.md'}", file=sys.stderr)


if __name__ == "__main__":
    main()
