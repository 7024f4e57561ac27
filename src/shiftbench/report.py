"""Tables from records: one row per (data, graph, family, order), figures over seeds."""

from __future__ import annotations

import io
from collections.abc import Iterable
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats

from shiftbench.records import load_records, write_atomic

GROUP_KEYS = ["data", "graph", "family", "order"]
COLUMNS = [
    *GROUP_KEYS,
    "parameters",
    "test_accuracy_mean",
    "test_accuracy_std",
    "test_accuracy_ci95",
    "test_accuracy_ci95_low",
    "test_accuracy_ci95_high",
    "seeds",
    "train_seconds_mean",
    "failed",
]
# What the terminal and markdown tables show (the CSV holds every column).
SHOWN = [*GROUP_KEYS, "parameters", "test_accuracy_mean", "test_accuracy_ci95", "seeds", "train_seconds_mean", "failed"]
CONFIDENCE = 0.95


def t_interval(mean: float, std: float, count: int, confidence: float = CONFIDENCE) -> tuple[float, float]:
    """The Student t confidence interval of a mean over ``count`` seeds:
    ``mean +- t_{(1+c)/2, count-1} * std / sqrt(count)``; NaN for fewer than two seeds."""
    if count < 2 or not np.isfinite(std):
        return float("nan"), float("nan")
    if std == 0:
        return mean, mean
    low, high = stats.t.interval(confidence, df=count - 1, loc=mean, scale=std / np.sqrt(count))
    return float(low), float(high)


def summary_table(records: pd.DataFrame) -> pd.DataFrame:
    """Aggregate records over seeds.

    Returns one row per (data, graph, family, order) with: ``parameters`` (median over completed
    jobs), ``test_accuracy_mean`` and ``test_accuracy_std`` (sample standard deviation, NaN for a
    single seed), the 95% Student t interval of the mean (``test_accuracy_ci95_low``/``_high``
    and its half-width ``test_accuracy_ci95``), ``seeds`` (completed jobs),
    ``train_seconds_mean`` and ``failed`` (failed jobs).
    """
    frame = records.copy()
    for column in ("parameters", "test_accuracy", "train_seconds", "order"):
        if column not in frame:
            frame[column] = float("nan")
    frame["completed"] = frame["status"] == "completed"
    frame["is_failed"] = ~frame["completed"]
    done = frame.where(frame["completed"])
    frame["parameters"] = done["parameters"]
    frame["test_accuracy"] = done["test_accuracy"]
    frame["train_seconds"] = done["train_seconds"]
    frame["order"] = frame["order"].astype("Int64")
    table = (
        frame.groupby(GROUP_KEYS, dropna=False, sort=True)
        .agg(
            parameters=("parameters", "median"),
            test_accuracy_mean=("test_accuracy", "mean"),
            test_accuracy_std=("test_accuracy", "std"),
            seeds=("completed", "sum"),
            train_seconds_mean=("train_seconds", "mean"),
            failed=("is_failed", "sum"),
        )
        .reset_index()
    )
    table["parameters"] = table["parameters"].astype("Int64")
    intervals = [
        t_interval(mean, std, int(count))
        for mean, std, count in zip(table["test_accuracy_mean"], table["test_accuracy_std"], table["seeds"])
    ]
    table["test_accuracy_ci95_low"] = [low for low, _ in intervals]
    table["test_accuracy_ci95_high"] = [high for _, high in intervals]
    table["test_accuracy_ci95"] = (table["test_accuracy_ci95_high"] - table["test_accuracy_ci95_low"]) / 2
    return table[COLUMNS]


def _cells(table: pd.DataFrame) -> list[list[str]]:
    """Every value of ``table`` as display text (accuracies to 3 places, seconds to 1)."""

    def show(column: str, value: object) -> str:
        if pd.isna(value):
            return "-"
        if column.startswith("test_accuracy"):
            return f"{value:.3f}"
        if column == "train_seconds_mean":
            return f"{value:.1f}"
        if column == "parameters":
            return f"{int(value):,}"
        return str(value)

    return [[show(column, value) for column, value in zip(table.columns, row)] for row in table.itertuples(index=False)]


HEADERS = {
    "test_accuracy_mean": "test acc",
    "test_accuracy_std": "± std",
    "test_accuracy_ci95": "± 95% CI",
    "train_seconds_mean": "train s",
}


def format_markdown(table: pd.DataFrame) -> str:
    headers = [HEADERS.get(column, column) for column in table.columns]
    numeric = [pd.api.types.is_numeric_dtype(table[column]) for column in table.columns]
    lines = ["| " + " | ".join(headers) + " |", "|" + "".join(" ---: |" if n else " --- |" for n in numeric)]
    lines += ["| " + " | ".join(row) + " |" for row in _cells(table)]
    return "\n".join(lines) + "\n"


def format_terminal(table: pd.DataFrame) -> str:
    headers = [HEADERS.get(column, column) for column in table.columns]
    rows = _cells(table)
    widths = [max(len(text) for text in column) for column in zip(headers, *rows)]
    numeric = [pd.api.types.is_numeric_dtype(table[column]) for column in table.columns]

    def line(texts: list[str]) -> str:
        return "  ".join(t.rjust(w) if n else t.ljust(w) for t, w, n in zip(texts, widths, numeric)).rstrip()

    return "\n".join([line(headers), line(["-" * w for w in widths]), *map(line, rows)])


def write_report(paths: Iterable[Path], out: Path) -> str:
    """Load the records under ``paths``, write ``summary.csv`` and ``summary.md`` into ``out``,
    and return the table as terminal text."""
    paths = list(paths)
    records = load_records(paths)
    if records.empty:
        raise ValueError(f"no records (result.json) found under {', '.join(map(str, paths))}")
    table = summary_table(records)
    buffer = io.StringIO()
    table.to_csv(buffer, index=False)
    write_atomic(out / "summary.csv", buffer.getvalue())
    write_atomic(out / "summary.md", format_markdown(table[SHOWN]))
    return format_terminal(table[SHOWN])
