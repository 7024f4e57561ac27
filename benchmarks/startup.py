"""Start-up: how long commands take from the shell, against ``python -c "import torch"``.

``python -m benchmarks.startup`` runs each command several times in turn (fresh processes, so
the file cache is warm for all alike) and writes ``results/benchmarks/startup.json`` and ``.md``:
the median wall time of each and its ratio to importing torch. Goal: ``shiftbench --help`` and
a one-epoch fc job at most 1.5x the import of torch. Two reference lines say where the time of a
job goes that no deferral removes: torch's optimizers import ``torch._dynamo`` on their first
step, and the demo's data needs scikit-learn (its k-NN graph and stratified splits).
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

from benchmarks.measure import write_markdown_table
from shiftbench.records import write_atomic

BIN = Path(sys.executable).parent
REPEATS = 5


def commands(folder: str) -> dict[str, list[str]]:
    """The commands timed, by label; the first is the reference."""
    python = str(BIN / "python")
    return {
        "import torch": [python, "-c", "import torch"],
        "import torch, torch._dynamo": [python, "-c", "import torch, torch._dynamo"],
        "import torch, torch._dynamo, sklearn.neighbors": [python, "-c", "import torch, torch._dynamo, sklearn.neighbors"],
        "shiftbench --help": [str(BIN / "shiftbench"), "--help"],
        "shiftbench arch=fc train.epochs=1 (demo data)": [
            str(BIN / "shiftbench"), "arch=fc", "train.epochs=1", f"results_dir={folder}", "force=true",
        ],
    }


def measure(repeats: int) -> dict[str, float]:
    """Median seconds of each command over ``repeats`` rounds (the commands interleaved, so a
    busy spell of the machine touches all of them alike)."""
    times: dict[str, list[float]] = {}
    with tempfile.TemporaryDirectory() as folder:
        timed = commands(folder)
        for _ in range(repeats):
            for label, command in timed.items():
                started = time.perf_counter()
                subprocess.run(command, check=True, capture_output=True, cwd=folder)
                times.setdefault(label, []).append(time.perf_counter() - started)
    return {label: statistics.median(values) for label, values in times.items()}


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.startup", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    parser.add_argument("--repeats", type=int, default=REPEATS)
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    medians = measure(arguments.repeats)
    reference = medians["import torch"]
    limits = machine()
    facts = {"date": datetime.now(timezone.utc).strftime("%Y-%m-%d"), "machine": f"{limits['cpu']}, {limits['cores']} cores",
             "repeats": arguments.repeats,
             "seconds": medians, "ratio_to_import_torch": {label: value / reference for label, value in medians.items()}}
    write_atomic(arguments.out / "startup.json", json.dumps(facts, indent=2) + "\n")
    write_markdown_table(
        arguments.out / "startup.md", "Start-up: commands against importing torch",
        f"`python -m benchmarks.startup`, {facts['date']}, {facts['machine']}; median of {arguments.repeats} "
        "fresh processes each. Goal: `shiftbench --help` and a one-epoch fc job at most 1.5x `import torch`.",
        {"command": "---", "seconds": "---:", "ratio to `import torch`": "---:"},
        [[f"`{label}`", f"{value:.2f}", f"{value / reference:.2f}"] for label, value in medians.items()],
    )

if __name__ == "__main__":
    main()
