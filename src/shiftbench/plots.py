"""Plots of a summary table, written as PNG. Each function returns the points it drew, so
tests can check them against the table without reading pixels."""

from __future__ import annotations

import io
from pathlib import Path

import matplotlib

matplotlib.use("Agg")  # files only: no display is needed or assumed

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from shiftbench.records import CURVE_FILE, RECORD_FILE, read_record, write_atomic  # noqa: E402
from shiftbench.registry import FAMILIES  # noqa: E402



def marker(family: str) -> str:
    """The family's marker as its registry entry declares it (``d`` for names not registered)."""
    return FAMILIES[family].marker if family in FAMILIES else "d"


def _save(figure: plt.Figure, path: Path) -> Path:
    """Render to PNG in memory, then write it atomically."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110, bbox_inches="tight")
    plt.close(figure)
    return write_atomic(path, buffer.getvalue())


def _label(row: pd.Series, keys: list[str]) -> str:
    return " ".join(str(row[key]) for key in keys if not pd.isna(row[key]))


# The range each metric lives in: error bars are clipped to it.
METRIC_RANGE = {"accuracy": (0.0, 1.0)}


def clipped_error(mean: pd.Series, half_width: pd.Series, metric: str = "accuracy") -> np.ndarray:
    """``(2, rows)`` error bar lengths of ``mean +- half_width`` clipped to the metric's range
    (accuracy's [0, 1]; an error's [0, inf))."""
    low, high = METRIC_RANGE.get(metric, (0.0, np.inf))
    half = half_width.fillna(0).to_numpy(dtype=float)
    centre = mean.to_numpy(dtype=float)
    return np.vstack([np.minimum(half, centre - low), np.minimum(half, high - centre)])


def score_label(table: pd.DataFrame) -> str:
    """The y label of a table's metric: ``test accuracy (mean, 95% CI; higher is better)``."""
    return f"test {table.attrs['metric']} (mean, 95% CI; {table.attrs['better']} is better)"


def score_vs_parameters(table: pd.DataFrame, path: Path) -> tuple[Path, pd.DataFrame]:
    """Mean test figure of the table's metric (with its 95% interval, clipped to the metric's
    range) against trainable parameters, log x, one marker and colour per family and graph.
    Parameter-free rows (the floors) are drawn as labelled horizontal lines, not at some
    parameter count. The points' columns are ``mean`` and ``ci95``."""
    metric = table.attrs["metric"]
    points = table[["family", "graph", "parameters", f"test_{metric}_mean", f"test_{metric}_ci95"]].rename(
        columns={f"test_{metric}_mean": "mean", f"test_{metric}_ci95": "ci95"}
    ).dropna(subset=["mean"])
    points = points.assign(x=points["parameters"].astype(float))
    figure, axis = plt.subplots(figsize=(6, 4))
    trained = points[points["x"] > 0]
    for (family, graph), group in trained.groupby(["family", "graph"], sort=True):
        label = family if graph in ("none", "line", "cycle") and family != "graph_conv" else f"{family} on {graph}"
        axis.errorbar(
            group["x"], group["mean"], yerr=clipped_error(group["mean"], group["ci95"], metric),
            marker=marker(family), linestyle="none", capsize=3, label=label,
        )
    for family, group in points[~(points["x"] > 0)].groupby("family", sort=True):
        axis.axhline(group["mean"].mean(), linestyle="--", linewidth=1, color="grey")
        axis.annotate(f"{family} (no parameters)", (0.01, group["mean"].mean()), xycoords=("axes fraction", "data"),
                      fontsize=7, va="bottom", color="dimgrey")
    axis.set_xscale("log")
    axis.set_xlabel("trainable parameters (log)")
    axis.set_ylabel(score_label(table))
    axis.legend(fontsize=8)
    axis.grid(alpha=0.3)
    return _save(figure, path), points.reset_index(drop=True)


def score_vs_order(table: pd.DataFrame, path: Path) -> tuple[Path, pd.DataFrame]:
    """Mean test figure of the table's metric against filter order, one line per (family,
    graph, operator). The points' columns are ``mean`` and ``ci95``."""
    metric = table.attrs["metric"]
    points = table.rename(columns={f"test_{metric}_mean": "mean", f"test_{metric}_ci95": "ci95"}).dropna(
        subset=["order", "mean"]
    )[["family", "graph", "operator", "order", "mean", "ci95"]]
    figure, axis = plt.subplots(figsize=(6, 4))
    for _, group in points.groupby(["family", "graph", "operator"], sort=True):
        group = group.sort_values("order")
        axis.errorbar(
            group["order"].astype(float), group["mean"], yerr=group["ci95"].fillna(0).to_numpy(),
            marker=marker(group["family"].iloc[0]), capsize=3,
            label=_label(group.iloc[0], ["family", "graph", "operator"]),
        )
    axis.set_xlabel("filter order K")
    axis.set_ylabel(score_label(table))
    axis.legend(fontsize=8)
    axis.grid(alpha=0.3)
    return _save(figure, path), points.reset_index(drop=True)


def scaling(table: pd.DataFrame, path: Path) -> tuple[Path, pd.DataFrame]:
    """The test figure of the table's metric and trainable parameters against nodes, one line
    per family (log x). The points' columns are ``mean`` and ``ci95``."""
    metric = table.attrs["metric"]
    points = table.rename(columns={f"test_{metric}_mean": "mean", f"test_{metric}_ci95": "ci95"}).dropna(
        subset=["nodes", "mean"]
    )[["family", "nodes", "parameters", "mean", "ci95", "epoch_seconds_mean"]]
    figure, (score, parameters) = plt.subplots(1, 2, figsize=(10, 4))
    for family, group in points.groupby("family", sort=True):
        group = group.sort_values("nodes")
        shape = marker(family)
        score.errorbar(
            group["nodes"].astype(float), group["mean"], yerr=group["ci95"].fillna(0).to_numpy(),
            marker=shape, capsize=3, label=family,
        )
        parameters.plot(group["nodes"].astype(float), group["parameters"].astype(float).clip(lower=1), marker=shape, label=family)
    for axis in (score, parameters):
        axis.set_xscale("log")
        axis.set_xlabel("nodes (log)")
        axis.grid(alpha=0.3)
        axis.legend()
    parameters.set_yscale("log")
    score.set_ylabel(score_label(table))
    parameters.set_ylabel("trainable parameters (log)")
    return _save(figure, path), points.reset_index(drop=True)


def run_label(folder: Path) -> str:
    """``seed 2`` (``seed 2, split 1`` on a redrawn split) from the record in ``folder``; the
    folder's name when it holds no readable record."""
    try:
        record = read_record(folder / RECORD_FILE)
    except (OSError, ValueError):
        return folder.name
    split = record.get("split") or 0
    return f"seed {record.get('seed')}" + (f", split {split}" if split else "")


def learning_curves(folders: list[str], path: Path) -> tuple[Path, pd.DataFrame]:
    """Training loss and the validation figure of the task's metric (the curve's ``val_<metric>``
    column) per epoch, one line per seed of a table row, labelled by seed."""
    curves = []
    for folder in folders:
        file = Path(folder) / CURVE_FILE
        if file.is_file():
            curve = pd.read_csv(file)
            if not curve.empty:
                curves.append(curve.assign(run=run_label(Path(folder))))
    points = pd.concat(curves, ignore_index=True) if curves else pd.DataFrame(columns=["epoch", "run"])
    validation = next((column for column in points.columns if column.startswith("val_") and column != "val_loss"), "val_accuracy")
    figure, (loss, score) = plt.subplots(1, 2, figsize=(10, 4))
    for name, curve in points.groupby("run", sort=True):
        loss.plot(curve["epoch"], curve["train_loss"], label=name)
        score.plot(curve["epoch"], curve[validation], label=name)
    loss.set_ylabel("training loss")
    score.set_ylabel(f"validation {validation[4:]}")
    if len(points):
        score.legend(fontsize=7)
    for axis in (loss, score):
        axis.set_xlabel("epoch")
        axis.grid(alpha=0.3)
    return _save(figure, path), points


def standard_plots(table: pd.DataFrame, out: Path) -> list[Path]:
    """The plots a table supports: its metric against parameters always
    (``accuracy_vs_parameters.png``, ``rmse_vs_parameters.png``); against order when rows differ
    in order; the scaling plot when they differ in nodes."""
    metric = table.attrs["metric"]
    written = [score_vs_parameters(table, out / f"{metric}_vs_parameters.png")[0]]
    if table["order"].dropna().nunique() > 1:
        written.append(score_vs_order(table, out / f"{metric}_vs_order.png")[0])
    if table["nodes"].dropna().nunique() > 1:
        written.append(scaling(table, out / "scaling.png")[0])
    return written



def frequency_responses(
    eigenvalues: np.ndarray, summaries: list[dict], path: Path, true_responses: tuple | None = None
) -> tuple[Path, pd.DataFrame]:
    """Per layer, the median and 10-90% band of ``|h(lambda)|`` over channel pairs against the
    (real) eigenvalues; beside them, the data's true responses when known
    (``(grid, {name: response})``)."""
    panels = len(summaries) + (1 if true_responses else 0)
    figure, axes = plt.subplots(1, panels, figsize=(4.2 * panels, 3.6), squeeze=False)
    x = eigenvalues.real
    rows = []
    for index, (axis, summary) in enumerate(zip(axes[0], summaries)):
        axis.fill_between(x, summary["low"], summary["high"], alpha=0.3, label="10-90% of channel pairs")
        axis.plot(x, summary["median"], label="median")
        axis.set_title(f"layer {index + 1} (learned)")
        axis.set_xlabel("eigenvalue of S")
        axis.set_ylabel("|h(lambda)|")
        axis.legend(fontsize=7)
        rows += [{"layer": index + 1, "eigenvalue": value, "median": m} for value, m in zip(x, summary["median"])]
    if true_responses:
        grid, responses = true_responses
        axis = axes[0][-1]
        for name, response in responses.items():
            axis.plot(grid, response, label=name)
        axis.set_title("the regimes' true responses")
        axis.set_xlabel("eigenvalue of S")
        axis.legend(fontsize=7)
    return _save(figure, path), pd.DataFrame(rows)


def perturbation(table: pd.DataFrame, path: Path) -> tuple[Path, pd.DataFrame]:
    """The mean test figure (its ``test_<metric>`` column; and the range over draws) against the
    fraction of edges perturbed."""
    column = next(name for name in table.columns if name.startswith("test_"))
    points = table.groupby(["mode", "fraction"], as_index=False)[column].agg(["mean", "min", "max"])
    figure, axis = plt.subplots(figsize=(6, 4))
    for mode, group in points.groupby("mode", sort=True):
        axis.errorbar(
            group["fraction"] * 100, group["mean"],
            # The mean of equal draws can round a hair past them; the bars start at zero length.
            yerr=[(group["mean"] - group["min"]).clip(lower=0), (group["max"] - group["mean"]).clip(lower=0)],
            marker="o", capsize=3, label=mode,
        )
    axis.set_xlabel("edges perturbed (%)")
    axis.set_ylabel(f"test {column[5:]} (mean, range over draws)")
    axis.legend()
    axis.grid(alpha=0.3)
    return _save(figure, path), points
