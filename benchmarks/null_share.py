"""How often the verdict says a graph adds when it cannot: planted null draws through the whole
decision study, the corrected test's share beside the plain paired t-test's on the same units.

Each draw writes the own-files example's signals (filtered on a geometric graph) with a
degree-preserving rewiring of that graph as the user's graph (``examples/own_files.py
--rewired``), so the graph given to the models carries nothing the degrees do not. The study
(small budgets, graph_conv and the 1-NN floor, a new rewired control per fold) then asks whether
the graph beats its control. With the null true, the share of "adds" should stay near
``decision.alpha`` (Nadeau & Bengio 2003's purpose); the plain paired t-test on resampled
units is known to exceed it (Dietterich 1998).

``python -m benchmarks.null_share [--draws 40]`` writes ``results/benchmarks/null_share.{json,md}``.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import json
import math
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

from shiftbench.records import write_atomic

STUDY = [
    "train.epochs=40", "train.patience=8", "decision.protocol=tune_once", "decision.trials=2",
    "decision.splits=5", "decision.seeds=1",
    "decision.candidates=[{name: gnn, overrides: [arch=graph_conv]}, {name: nearest, overrides: [arch=nearest]}]",
]


def graph_question(verdict: dict) -> dict:
    """The graph candidate's comparison with its rewired control, from ``verdict.json``."""
    entry = next(entry for entry in verdict["candidates"] if entry.get("graph", {}).get("comparison"))
    return {"outcome": entry["graph"]["outcome"], **entry["graph"]["comparison"]}


def plain_adds(comparison: dict, rope: float, alpha: float) -> bool:
    """The same rule on the plain paired t interval and p (no correction, one comparison)."""
    return comparison["plain_low"] > rope and comparison["t_p"] < alpha


def one_draw(seed: int, work: Path) -> dict:
    from examples.own_files import write_own_files
    from shiftbench.cli import CONFIG_DIR
    from shiftbench.decision_study import run_study

    write_own_files(work, nodes=30, per_class=40, rewired=True, seed=seed)
    overrides = [f"results_dir={work / 'results'}", "data=file", f"data.path={work / 'signals.csv'}",
                 f"data.graph={work / 'roads.csv'}", *STUDY]
    with contextlib.redirect_stdout(io.StringIO()):
        run_study(overrides, CONFIG_DIR, say=lambda line: None)
    verdict = json.loads((work / "results" / "decision" / "verdict.json").read_text())
    found = graph_question(verdict)
    return {"seed": seed, "outcome": found["outcome"], "mean": found["mean"], "p": found["p"], "t_p": found["t_p"],
            "adds": found["outcome"] == "earns_its_keep", "plain_adds": plain_adds(found, verdict["rope"], verdict["alpha"]),
            "rope": verdict["rope"], "alpha": verdict["alpha"]}


def binomial_upper(share: float, draws: int) -> float:
    """The share's 95% upper bound by the normal approximation (enough for a report line)."""
    return min(1.0, share + 1.96 * math.sqrt(max(share * (1 - share), 1 / draws) / draws))


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m benchmarks.null_share", description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=40)
    parser.add_argument("--out", type=Path, default=Path("results/benchmarks"))
    arguments = parser.parse_args(argv)
    if arguments.draws < 1:
        raise SystemExit(f"--draws={arguments.draws} is not accepted; accepted: an integer >= 1")
    from benchmarks.layers import machine

    facts = machine()
    started = time.perf_counter()
    draws = []
    for seed in range(arguments.draws):
        with tempfile.TemporaryDirectory() as work:
            draws.append(one_draw(seed, Path(work)))
        print(f"draw {seed + 1}/{arguments.draws}: {draws[-1]['outcome']} (mean {draws[-1]['mean']:+.3f}, "
              f"corrected p {draws[-1]['p']:.3g}, plain p {draws[-1]['t_p']:.3g})", file=sys.stderr)
    wall = time.perf_counter() - started
    corrected = sum(draw["adds"] for draw in draws) / len(draws)
    plain = sum(draw["plain_adds"] for draw in draws) / len(draws)
    figures = {
        "date": datetime.now(timezone.utc).strftime("%Y-%m-%d"),
        "machine": {key: facts[key] for key in ("cpu", "cores", "torch")},
        "study": STUDY, "draws": draws, "wall_seconds": wall,
        "share_adds_corrected": corrected, "share_adds_plain": plain, "alpha": draws[0]["alpha"],
        "size_corrected": sum(draw["p"] < draw["alpha"] for draw in draws) / len(draws),
        "size_plain": sum(draw["t_p"] < draw["alpha"] for draw in draws) / len(draws),
    }
    arguments.out.mkdir(parents=True, exist_ok=True)
    write_atomic(arguments.out / "null_share.json", json.dumps(figures, indent=1) + "\n")
    outcomes = {outcome: sum(draw["outcome"] == outcome for draw in draws) for outcome in sorted({d["outcome"] for d in draws})}
    write_atomic(arguments.out / "null_share.md", "\n".join([
        "# How often a graph that carries nothing is said to add",
        "",
        f"Measured {figures['date']} on {facts['cpu']}, {facts['cores']} cores, torch {facts['torch']} by "
        f"`python -m benchmarks.null_share --draws {len(draws)}` ({wall / 60:.1f} minutes): {len(draws)} planted null draws "
        "(signals filtered on one graph, the models given a degree-preserving rewiring of it), each a whole decision "
        f"study ({' '.join(STUDY[:-1])}, graph_conv and the 1-NN floor).",
        "",
        "| test on the graph against its rewired control | share said to add | 95% upper bound | alpha |",
        "| --- | ---: | ---: | ---: |",
        f"| corrected resampled t (the verdict's) | {corrected:.2f} | {binomial_upper(corrected, len(draws)):.2f} | {figures['alpha']} |",
        f"| plain paired t, same rule, same units | {plain:.2f} | {binomial_upper(plain, len(draws)):.2f} | {figures['alpha']} |",
        "",
        "The tests alone, without the ROPE (share of draws with p < alpha, either sign: each test's size, which "
        "should not exceed alpha):",
        "",
        "| test | share with p < alpha | 95% upper bound |",
        "| --- | ---: | ---: |",
        *(f"| {name} | {share:.2f} | {binomial_upper(share, len(draws)):.2f} |" for name, share in (
            ("corrected resampled t", figures["size_corrected"]), ("plain paired t", figures["size_plain"]))),
        "",
        "The verdict's outcomes: " + ", ".join(f"{name.replace('_', ' ')} {count}" for name, count in outcomes.items()) + ".",
        "",
    ]))
    print(f"corrected {corrected:.2f}, plain {plain:.2f}; wrote {arguments.out / 'null_share.md'}", file=sys.stderr)


if __name__ == "__main__":
    main()
