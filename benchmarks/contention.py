"""The layer on a busy machine: each implementation idle and beside one competing busy process,
under OpenMP's default, active and passive waiting.

``python -m benchmarks.contention`` measures the k-NN case of the targets (N=1024, B=256, F=16,
K=4, forward and forward+backward) with torch on every core, six ways: waiting policy unset
(libgomp spins a while at a barrier, then sleeps), ``ACTIVE`` (threads spin) or ``PASSIVE``
(they sleep), each idle and beside a competitor (one process multiplying matrices on one thread, as other work on a
shared machine would). It writes ``results/benchmarks/contention.json`` and ``.md``: the medians
and each slowdown (busy over idle). Goal: at most 2.5x, about the share of the cores the
competitor takes (2x on 2 cores) plus some.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from datetime import datetime, timezone
from pathlib import Path

from benchmarks.layers import in_subprocess
from benchmarks.measure import busy_competitor, write_markdown_table
from shiftbench.records import write_atomic

CASE = ["--group", "knn", "1024", "256", "--orders", "4"]
# "default": the variable unset, so libgomp spins a while at a barrier and then sleeps.
POLICIES = ("default", "ACTIVE", "PASSIVE")


def measure(policy: str, busy: bool) -> list[dict]:
    """The case's rows under ``policy``, with a competitor running throughout when ``busy``."""
    environment = {key: value for key, value in os.environ.items() if key != "OMP_WAIT_POLICY"}
    if policy != "default":
        environment["OMP_WAIT_POLICY"] = policy
    with busy_competitor(busy):
        return in_subprocess(CASE, environment, inherit=False)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.contention", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    arguments = parser.parse_args(argv)
    from benchmarks.layers import machine

    limits = machine()
    table: dict[tuple[str, str, str], dict[str, float]] = {}
    for policy in POLICIES:
        for busy in (False, True):
            print(f"{policy}, {'busy' if busy else 'idle'} ...", file=sys.stderr, flush=True)
            for row in measure(policy, busy):
                if "median_ms" in row:
                    key = (policy, row["implementation"], row["pass"])
                    table.setdefault(key, {})["busy" if busy else "idle"] = row["median_ms"]
    rows = [{"policy": policy, "implementation": implementation, "pass": pass_, **times,
             "slowdown": times["busy"] / times["idle"]} for (policy, implementation, pass_), times in sorted(table.items())]
    date = datetime.now(timezone.utc).strftime("%Y-%m-%d")
    write_atomic(arguments.out / "contention.json", json.dumps({"date": date, "cpu": limits["cpu"], "cores": limits["cores"],
                                                                "rows": rows}, indent=1) + "\n")
    write_markdown_table(
        arguments.out / "contention.md", "The layer beside a busy process",
        f"`python -m benchmarks.contention`, {date}, {limits['cpu']}, {limits['cores']} cores, torch on every core; "
        "k-NN graph, N=1024, B=256, F=16, K=4; medians in ms. Busy: one competing process multiplying 512x512 "
        "matrices on one thread throughout. Goal: a slowdown of at most 2.5x.",
        {"OMP_WAIT_POLICY": "---", "implementation": "---", "pass": "---", "idle": "---:", "busy": "---:", "slowdown": "---:"},
        [[row["policy"], row["implementation"], row["pass"], f"{row['idle']:.1f}", f"{row['busy']:.1f}", f"{row['slowdown']:.2f}x"]
         for row in rows],
    )

if __name__ == "__main__":
    main()
