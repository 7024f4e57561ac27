"""Plots of the decision study: accuracy against cost (with the Pareto front), paired differences
per unit, and the critical-difference diagram across datasets. Each returns the file it wrote."""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

import matplotlib

matplotlib.use("Agg")  # files only: no display is needed or assumed

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import scikit_posthocs  # noqa: E402

from shiftbench.records import write_atomic  # noqa: E402
from shiftbench.registry import FAMILIES  # noqa: E402


def _save(figure: plt.Figure, path: Path) -> Path:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110, bbox_inches="tight")
    plt.close(figure)
    return write_atomic(path, buffer.getvalue())


def pareto_front(points: pd.DataFrame, sign: float = 1.0) -> list[str]:
    """Candidates no other beats on both axes (a better score, lower training time); ``sign``
    -1 for a score where lower is better."""
    front = []
    better = sign * points["score"]
    for name, row in points.iterrows():
        mine = sign * row["score"]
        dominated = ((better >= mine) & (points["seconds"] <= row["seconds"])
                     & ((better > mine) | (points["seconds"] < row["seconds"]))).any()
        if not dominated:
            front.append(name)
    return front


def pareto(units: pd.DataFrame, candidates: list[Any], path: Path, metric: str = "accuracy", better: str = "higher") -> Path:
    """Mean test figure of the metric (95% t interval, clipped to accuracy's [0, 1] or an
    error's [0, inf)) against mean training seconds (log), one marker per candidate; the Pareto
    front joined by a line."""
    from scipy import stats

    completed = units[units["status"].isin(["completed", "timed_out"])]
    grouped = completed.groupby("candidate")
    test = f"test_{metric}"
    points = pd.DataFrame({
        "score": grouped[test].mean(),
        "seconds": grouped["train_seconds"].mean().clip(lower=1e-3),
        "half": grouped[test].agg(
            lambda x: stats.t.ppf(0.975, len(x) - 1) * x.std(ddof=1) / np.sqrt(len(x)) if len(x) > 1 else 0.0
        ).fillna(0.0),
    })
    figure, axis = plt.subplots(figsize=(7, 4.5))
    for candidate in candidates:
        if candidate.name not in points.index:
            continue
        row = points.loc[candidate.name]
        ceiling = 1.0 if metric == "accuracy" else np.inf
        low, high = max(0.0, row.score - row.half), min(ceiling, row.score + row.half)
        axis.errorbar(row.seconds, row.score, yerr=[[row.score - low], [high - row.score]],
                      marker=FAMILIES[candidate.family].marker, linestyle="none", capsize=3, label=candidate.name)
    front = points.loc[pareto_front(points, 1.0 if better == "higher" else -1.0)].sort_values("seconds")
    axis.plot(front["seconds"], front["score"], color="grey", linewidth=1, zorder=0, label="Pareto front")
    axis.set_xscale("log")
    axis.set_xlabel("training seconds per run (mean, log)")
    axis.set_ylabel(f"test {metric} (mean, 95% CI; {better} is better)")
    axis.legend(fontsize=7, loc="best")
    axis.grid(alpha=0.3)
    return _save(figure, path)


def paired_differences(result: dict[str, Any], path: Path) -> Path:
    """Each comparison's per-fold differences (a candidate against the reference; a graph
    candidate against its rewired control), the mean with its corrected interval, and the ROPE
    as a band."""
    compared = [entry for entry in result["candidates"] if "comparison" in entry]
    compared += [{"candidate": f"{entry['candidate']} vs rewired", "comparison": entry["graph"]["comparison"]}
                 for entry in result["candidates"] if "comparison" in entry.get("graph", {})]
    figure, axis = plt.subplots(figsize=(7, 0.5 + 0.45 * max(len(compared), 1)))
    rope = result["rope"]
    axis.axvspan(-rope, rope, color="grey", alpha=0.2, label=f"ROPE ±{rope}")
    for row, entry in enumerate(compared):
        comparison = entry["comparison"]
        differences = np.asarray(comparison["differences"])
        axis.scatter(differences, np.full(len(differences), row) + np.linspace(-0.15, 0.15, len(differences)), s=10, alpha=0.6)
        if not comparison.get("degenerate"):
            axis.errorbar(comparison["mean"], row, xerr=[[comparison["mean"] - comparison["low"]], [comparison["high"] - comparison["mean"]]],
                          color="black", marker="|", capsize=4)
    axis.set_yticks(range(len(compared)), [entry["candidate"] for entry in compared], fontsize=8)
    axis.axvline(0, color="black", linewidth=0.5)
    metric = result.get("metric", "accuracy")
    if result.get("better", "higher") == "higher":
        axis.set_xlabel(f"test {metric} minus {result['reference']}'s (or the control's), per fold")
    else:
        axis.set_xlabel(f"{result['reference']}'s (or the control's) test {metric} minus the candidate's (positive: better), per fold")
    axis.set_ylim(-0.6, len(compared) + 0.2)
    axis.legend(fontsize=7, loc="upper left")
    return _save(figure, path)


def tuning_curves(curves: dict[str, np.ndarray], path: Path, metric: str = "accuracy", better: str = "higher") -> Path:
    """Each tuned candidate's expected best validation figure against the number of trials
    (Dodge et al. 2019), with the quarter and half of the budget marked."""
    figure, axis = plt.subplots(figsize=(7, 4))
    trials = max(len(curve) for curve in curves.values())
    for name, curve in curves.items():
        axis.plot(np.arange(1, len(curve) + 1), curve, marker="o", markersize=3, label=name)
    for count in sorted({max(1, trials // 4), max(1, trials // 2)}):
        axis.axvline(count, color="grey", linewidth=0.6, linestyle=":")
    axis.set_xlabel("tuning trials")
    axis.set_ylabel(f"expected best val {metric} ({better} is better)")
    axis.legend(fontsize=7, loc="best")
    axis.grid(alpha=0.3)
    return _save(figure, path)


def critical_difference(test: Any, path: Path) -> Path:
    """The critical-difference diagram (scikit-posthocs) of a :class:`statistics.RankTest`."""
    figure, axis = plt.subplots(figsize=(7, 2.5))
    scikit_posthocs.critical_difference_diagram(test.ranks, test.nemenyi, ax=axis)
    axis.set_title(f"average ranks; Nemenyi CD = {test.critical_difference:.2f}", fontsize=9)
    return _save(figure, path)
