"""Tables from records: one row per setting (a config up to its seed), figures over seeds."""

from __future__ import annotations

import io
import json
from collections.abc import Iterable
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats

from shiftbench import plots
from shiftbench.records import (
    FINAL_STATUSES, MANIFEST_FILE, computed_content, load_records, read_manifest, with_scores, write_atomic,
)

# What tells settings apart, in the order tables show it.
DESCRIBE = ["data", "nodes", "graph", "operator", "family", "order", "budget"]
# The figures of a table whose records are scored by ``metric`` (accuracy, rmse): the test
# figures are named for it (``test_accuracy_mean``, ``test_rmse_mean``).
SCORE_SUFFIXES = ("mean", "std", "ci95", "ci95_low", "ci95_high")


def figure_columns(metric: str) -> list[str]:
    """Every figure column of a table scored by ``metric``, in the CSV's order."""
    return ["parameters", *(f"test_{metric}_{suffix}" for suffix in SCORE_SUFFIXES), "seeds", "train_seconds_mean",
            "epoch_seconds_mean", "failed", "chance", "flags"]


def shown_columns(metric: str) -> list[str]:
    """What the terminal and markdown tables show (the CSV holds every column)."""
    return ["parameters", f"test_{metric}_mean", f"test_{metric}_ci95", "seeds", "train_seconds_mean", "failed", "flags"]


# Short names of metrics in headers, and the arrow that says which way is better.
SHORT = {"accuracy": "acc"}
ARROW = {"higher": "↑", "lower": "↓"}


def headers(metric: str, better: str) -> dict[str, str]:
    """Column headers: the metric and its direction (``test acc ↑``, ``test rmse ↓``)."""
    short = SHORT.get(metric, metric)
    return {
        f"test_{metric}_mean": f"test {short} {ARROW[better]}",
        f"test_{metric}_std": "± std",
        f"test_{metric}_ci95": "± 95% CI",
        "train_seconds_mean": "train s",
        "epoch_seconds_mean": "s/epoch",
        "chance": f"chance {short}",
    }


def table_metric(records: pd.DataFrame) -> tuple[str, str]:
    """The one metric the records are scored by and its direction (``higher``/``lower``);
    ValueError when they mix tasks of different metrics."""
    metrics = sorted(set(records["metric"]))
    if len(metrics) > 1:
        raise ValueError(
            f"records scored by {' and '.join(metrics)} cannot share one table; "
            "accepted: records of one task (select with --where task=NAME)"
        )
    return metrics[0], str(records["better"].iloc[0])
# What a record's flags say in a table row ("2 of 5 seeds at chance").
FLAG_TEXT = {"at_chance": "at chance", "loss_never_fell": "loss never fell"}
CONFIDENCE = 0.95
INTEGER_COLUMNS = ("nodes", "order", "budget", "parameters")


def t_interval(mean: float, std: float, count: int, confidence: float = CONFIDENCE) -> tuple[float, float]:
    """The Student t confidence interval of a mean over ``count`` seeds:
    ``mean +- t_{(1+c)/2, count-1} * std / sqrt(count)``; NaN for fewer than two seeds."""
    if count < 2 or not np.isfinite(std):
        return float("nan"), float("nan")
    if std == 0:
        return mean, mean
    low, high = stats.t.interval(confidence, df=count - 1, loc=mean, scale=std / np.sqrt(count))
    return float(low), float(high)


def seed_following_keys(configs: list[dict[str, str]]) -> set[str]:
    """The nested ``*.seed`` keys that equal the run's ``seed`` in every record that has them
    (a study's ``graph.seed: ${seed}``: a new rewiring for each training seed). They vary with
    the seed, so they tell seeds apart, not settings."""
    following = set()
    for key in {key for config in configs for key in config if key.endswith(".seed")}:
        holders = [config for config in configs if key in config]
        if all(config[key] == config.get("seed") for config in holders):
            following.add(key)
    return following


def setting_of(record: pd.Series, flat: dict[str, str], ignored: set[str]) -> str:
    """What a record computed, up to its seed: its flat config (``flat``) minus the seed, the
    keys in ``ignored`` and output keys (or, for a record without a config, its describing
    fields)."""
    if isinstance(record.get("config"), dict):
        content = {key: value for key, value in flat.items() if key != "seed" and key not in ignored}
    else:
        content = {key: None if pd.isna(record.get(key)) else record.get(key) for key in DESCRIBE}
    return json.dumps(content, sort_keys=True, default=str)


# Config keys the describing fields already show (or that tell seeds and splits apart).
DESCRIBED_KEYS = {"seed", "split", "data.source", "data.name", "data.nodes", "graph.source", "graph.operator", "arch.family",
                  "arch.order", "arch.budget"}


def flat_config(config: object, prefix: str = "") -> dict[str, str]:
    """A config's leaves as ``dotted.key -> value text`` (lists as JSON)."""
    if not isinstance(config, dict):
        return {}
    leaves: dict[str, str] = {}
    for key, value in config.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict):
            leaves.update(flat_config(value, name + "."))
        else:
            leaves[name] = json.dumps(value) if isinstance(value, (list, tuple)) else str(value)
    return leaves


def varied_keys(records: pd.DataFrame) -> tuple[list[str], list[dict[str, str]], set[str]]:
    """The config keys (beyond the describing fields and the seeds) that hold two or more
    values among the records that have them, in config order; each record's flat config; and
    the nested seeds that follow the run's seed."""
    configs = [flat_config(computed_content(c)) if isinstance(c, dict) else {} for c in records.get("config", [])]
    following = seed_following_keys(configs)
    values: dict[str, set[str]] = {}
    for config in configs:
        for key, value in config.items():
            values.setdefault(key, set()).add(value)
    varied = [key for key, seen in values.items() if len(seen) > 1 and key not in DESCRIBED_KEYS | following]
    return varied, configs, following


def graph_label(graph: object, graph_name: object) -> object:
    """The graph a row used, readable: the source, and for ``native`` and ``file`` the graph it
    stood for (``native: roads.csv``)."""
    if graph in ("native", "file") and isinstance(graph_name, str):
        return f"{graph}: {graph_name}"
    return graph


def flags_text(flags: pd.Series, completed: int) -> str | None:
    """``2 of 5 seeds at chance; 1 of 5 seeds loss never fell`` for the records' flag lists, or
    None when no record is flagged."""
    counts = {name: sum(name in cell for cell in flags if isinstance(cell, list)) for name in FLAG_TEXT}
    said = [f"{count} of {completed} seeds {FLAG_TEXT[name]}" for name, count in counts.items() if count]
    return "; ".join(said) or None


def filter_records(records: pd.DataFrame, where: Iterable[str]) -> pd.DataFrame:
    """Keep the records whose ``key`` column reads ``value`` for every ``key=value`` given."""
    for condition in where:
        key, separator, value = condition.partition("=")
        if not separator:
            raise ValueError(f"--where {condition!r} is not accepted; accepted: key=value, e.g. family=graph_conv")
        if key not in records.columns:
            raise ValueError(f"--where {condition!r}: no column {key!r}; accepted: {', '.join(DESCRIBE)} or any record field")
        records = records[records[key].map(lambda cell: str(cell) if not pd.isna(cell) else "-") == value]
    return records


def summary_table(records: pd.DataFrame, by: Iterable[str] = ()) -> pd.DataFrame:
    """Aggregate records over seeds: one row per setting.

    Columns: the describing fields (``data, nodes, graph, operator, family, order, budget``),
    every other config key whose value differs between records (named by its dotted key, such
    as ``arch.readout`` or ``train.lr``; ``-`` where a record's config lacks it),
    ``parameters`` (median over completed jobs), ``test_<metric>_mean`` and ``_std`` (sample
    standard deviation; the metric is the records' task's: ``test_accuracy_mean``,
    ``test_rmse_mean``), the 95% Student t interval of the mean (``_ci95_low``, ``_ci95_high``
    and half-width ``_ci95``), ``seeds`` (completed jobs), ``train_seconds_mean``,
    ``epoch_seconds_mean``, ``failed`` (failed jobs), ``chance`` (the task's floor on the test
    split: the majority-class rate, the RMSE of predicting the training mean), ``flags`` (``2 of 5 seeds at chance``: suspect runs, kept in the figures) and
    ``paths`` (the records' folders). ``graph`` names the graph a native or file source stood for.
    Rows are sorted by ``by`` (default: the describing fields). ``attrs`` holds ``varied``,
    ``metric`` and ``better``.
    """
    frame = records.copy() if "metric" in records else with_scores(records.copy())
    metric, better = table_metric(frame)
    for column in [*DESCRIBE, "parameters", "test_score", "train_seconds", "epochs_run", "path", "graph_name",
                   "chance_score", "flags"]:
        if column not in frame:
            frame[column] = float("nan")
    varied, configs, following = varied_keys(frame)
    if len(configs) != len(frame):  # records without any config at all
        configs = [{} for _ in range(len(frame))]
    frame["setting"] = [setting_of(row, flat, following) for (_, row), flat in zip(frame.iterrows(), configs)]
    frame["graph"] = [graph_label(graph, name) for graph, name in zip(frame["graph"], frame["graph_name"])]
    for key in varied:
        frame[key] = [config.get(key, "-") for config in configs]
    completed = frame["status"].isin(FINAL_STATUSES)
    frame["completed"] = completed
    frame["is_failed"] = ~completed
    for column in ("parameters", "test_score", "train_seconds"):
        frame[column] = pd.to_numeric(frame[column].where(completed), errors="coerce")
    frame["epoch_seconds"] = frame["train_seconds"] / pd.to_numeric(frame["epochs_run"], errors="coerce")
    table = (
        frame.groupby("setting", sort=False)
        .agg(
            **{column: (column, "first") for column in [*DESCRIBE, *varied]},
            parameters=("parameters", "median"),
            score_mean=("test_score", "mean"),
            score_std=("test_score", "std"),
            seeds=("completed", "sum"),
            train_seconds_mean=("train_seconds", "mean"),
            epoch_seconds_mean=("epoch_seconds", "mean"),
            failed=("is_failed", "sum"),
            chance=("chance_score", "mean"),
            flag_lists=("flags", list),
            paths=("path", lambda paths: [p for p in paths if isinstance(p, str)]),
        )
        .reset_index(drop=True)
    )
    table["flags"] = [flags_text(pd.Series(lists), int(seeds)) for lists, seeds in zip(table["flag_lists"], table["seeds"])]
    for column in INTEGER_COLUMNS:
        table[column] = pd.to_numeric(table[column], errors="coerce").round().astype("Int64")
    intervals = [
        t_interval(mean, std, int(count)) for mean, std, count in zip(table["score_mean"], table["score_std"], table["seeds"])
    ]
    score = f"test_{metric}"
    table = table.rename(columns={"score_mean": f"{score}_mean", "score_std": f"{score}_std"})
    table[f"{score}_ci95_low"] = [low for low, _ in intervals]
    table[f"{score}_ci95_high"] = [high for _, high in intervals]
    table[f"{score}_ci95"] = (table[f"{score}_ci95_high"] - table[f"{score}_ci95_low"]) / 2
    order = list(by) or [*DESCRIBE, *varied]
    figures = figure_columns(metric)
    unknown = [column for column in order if column not in table.columns]
    if unknown:
        raise ValueError(f"--by {unknown[0]!r} is not accepted; accepted: {', '.join(DESCRIBE + varied + figures)}")
    table = table.sort_values(order, na_position="last", kind="stable").reset_index(drop=True)
    table = table[[*DESCRIBE, *varied, *figures, "paths"]]
    table.attrs.update(varied=varied, metric=metric, better=better)
    return table


# Figures that, when equal in every row (all seeds done, none failed), are said once instead.
SAID_ONCE = ("seeds", "failed", "flags")


def split_constants(table: pd.DataFrame) -> tuple[dict[str, str], pd.DataFrame]:
    """Columns that hold one value in every row (said once, above the table: describing fields,
    seed and failure counts), and the table of what is left to show."""
    constants: dict[str, str] = {}
    single: list[str] = []
    if len(table) > 1:
        for column in [*DESCRIBE, *SAID_ONCE]:
            if column == "family" or table[column].nunique(dropna=False) != 1:
                continue
            single.append(column)
            value = table[column].iloc[0]
            if not pd.isna(value):  # a field no row has is not worth a word
                constants[column] = str(value)
    varied = table.attrs.get("varied", [])
    shown = table[[column for column in [*DESCRIBE, *varied, *shown_columns(table.attrs["metric"])] if column not in single]]
    shown.attrs.update(table.attrs)
    return constants, shown


def _cells(table: pd.DataFrame) -> list[list[str]]:
    """Every value of ``table`` as display text (figures of the metric to 3 places, seconds to 1)."""

    def show(column: str, value: object) -> str:
        if isinstance(value, (list, tuple)):
            return ", ".join(map(str, value))
        if pd.isna(value):
            return "-"
        if column.startswith("test_") or column == "chance":
            return f"{value:.3f}"
        if column.endswith("seconds_mean"):
            return f"{value:.1f}" if column.startswith("train") else f"{value:.3f}"
        if column in ("parameters", "budget"):
            return f"{int(value):,}"
        return str(value)

    return [[show(column, value) for column, value in zip(table.columns, row)] for row in table.itertuples(index=False)]


def _numeric(table: pd.DataFrame) -> list[bool]:
    return [pd.api.types.is_numeric_dtype(table[column]) for column in table.columns]


def column_headers(table: pd.DataFrame) -> list[str]:
    """The header of each column of a table that :func:`summary_table` made."""
    named = headers(table.attrs["metric"], table.attrs["better"])
    return [named.get(column, column) for column in table.columns]


def format_markdown(table: pd.DataFrame) -> str:
    lines = ["| " + " | ".join(column_headers(table)) + " |", "|" + "".join(" ---: |" if n else " --- |" for n in _numeric(table))]
    lines += ["| " + " | ".join(row) + " |" for row in _cells(table)]
    return "\n".join(lines) + "\n"


def format_terminal(table: pd.DataFrame) -> str:
    titles = ["row", *column_headers(table)]
    rows = [[str(number), *cells] for number, cells in enumerate(_cells(table))]
    widths = [max(len(text) for text in column) for column in zip(titles, *rows)]
    numeric = [True, *_numeric(table)]

    def line(texts: list[str]) -> str:
        return "  ".join(t.rjust(w) if n else t.ljust(w) for t, w, n in zip(texts, widths, numeric)).rstrip()

    return "\n".join([line(titles), line(["-" * w for w in widths]), *map(line, rows)])


OUTCOMES = ("trained", "resumed", "skipped", "claimed", "failed")


def launch_outcomes(paths: Iterable[Path]) -> dict[str, int]:
    """What the launches under ``paths`` did, counting each config once per launch folder (its
    latest line): trained, resumed, skipped (done before), claimed (trained by another process
    at the time), failed."""
    counts = dict.fromkeys(OUTCOMES, 0)
    for path in paths:
        manifests = [path / MANIFEST_FILE] if (path / MANIFEST_FILE).is_file() else list(path.rglob(MANIFEST_FILE)) if path.is_dir() else []
        for manifest in manifests:
            latest = {entry["config_hash"]: entry.get("outcome") for entry in read_manifest(manifest.parent)}
            for outcome in latest.values():
                if outcome in counts:
                    counts[outcome] += 1
    return counts


# A family's best row is "near chance" when it closes less than this share of the gap between
# chance and a perfect score (accuracy 1, error 0), while another family's best closes at least
# WELL_ABOVE of it.
NEAR_CHANCE, WELL_ABOVE = 0.1, 0.3


# Keys that tell runs apart without being settings a user would change to escape chance.
IGNORED = ("seed", "results_dir", "force", "threads", "arch.family")


def near_chance_notes(table: pd.DataFrame, configs: dict[str, dict[str, str]]) -> list[str]:
    """One sentence for each family whose best row scores near chance while another family's
    best row does not, naming the settings of that row that the better row does not share.

    Args:
        configs: each row's flat config (``dotted.key -> value``) by the row's first path.
    """
    mean = f"test_{table.attrs['metric']}_mean"
    scored = table.dropna(subset=[mean, "chance"]).copy()
    if scored.empty:
        return []
    higher = table.attrs["better"] == "higher"
    scored["rank"] = scored[mean] if higher else -scored[mean]
    best = scored.loc[scored.groupby("family")["rank"].idxmax()]
    perfect = 1.0 if higher else 0.0
    gap = lambda row: (row[mean] - row["chance"]) / (perfect - row["chance"] if abs(perfect - row["chance"]) > 1e-9 else 1e-9)
    leader = best.loc[best["rank"].idxmax()]
    if gap(leader) < WELL_ABOVE:
        return []
    notes = []
    for _, row in best.iterrows():
        if gap(row) >= NEAR_CHANCE:
            continue
        first = lambda paths: paths[0] if paths else None
        mine, theirs = configs.get(first(row["paths"]), {}), configs.get(first(leader["paths"]), {})
        differ = [f"{key}={value}" for key, value in mine.items() if theirs.get(key) != value and key not in IGNORED]
        hint = ""
        if mine.get("arch.readout") in ("mean", "max"):
            hint = (f"; a pooled readout ({mine['arch.readout']}) keeps no trace of where on the graph a signal "
                    "lies: try arch.readout=flatten, or let shiftbench-decide choose it")
        notes.append(
            f"{row['family']}'s best row scores {row[mean]:.3f}, near chance ({row['chance']:.3f}), "
            f"while {leader['family']} reaches {leader[mean]:.3f}; that {row['family']} row differs "
            f"in {', '.join(differ[:8]) or 'no config key'}{hint}"
        )
    return notes


def _outcomes_line(counts: dict[str, int]) -> str:
    return "jobs: " + ", ".join(f"{counts[name]} {name}" for name in OUTCOMES) if any(counts.values()) else ""


def _constants_line(constants: dict[str, str]) -> str:
    return "  ".join(f"{key}={value}" for key, value in constants.items())


def write_report(
    paths: Iterable[Path], out: Path, where: Iterable[str] = (), by: Iterable[str] = (), curves: int | None = None
) -> str:
    """Load the records under ``paths``, write ``summary.csv``, ``summary.md`` and the plots that
    the records support into ``out``, and return the table as terminal text.

    Args:
        where: ``key=value`` filters on record fields.
        by: columns to sort the rows by.
        curves: a row number whose learning curves to plot (``curves_row<N>.png``).
    """
    paths = list(paths)
    records = filter_records(load_records(paths), where)
    if records.empty:
        raise ValueError(f"no records (record.json) found under {', '.join(map(str, paths))}")
    table = summary_table(records, by)
    if curves is not None and not 0 <= curves < len(table):
        raise ValueError(f"--curves {curves} is not accepted; accepted: a row number 0..{len(table) - 1}")
    buffer = io.StringIO()
    with_per_class(table.drop(columns="paths"), table["paths"], records).to_csv(buffer, index=False)
    write_atomic(out / "summary.csv", buffer.getvalue())
    figures = plots.standard_plots(table, out)
    if curves is not None:
        figures.append(plots.learning_curves(table.loc[curves, "paths"], out / f"curves_row{curves}.png")[0])
    constants, shown = split_constants(table)
    outcomes = _outcomes_line(launch_outcomes(paths))
    configs = {path: flat_config(config) for path, config in zip(records.get("path", []), records.get("config", []))
               if isinstance(config, dict)}
    notes = [f"note: {note}" for note in near_chance_notes(table, configs)]
    check = graph_check_lines(records)
    markdown = ["# Summary", ""] + ([outcomes + ".", ""] if outcomes else []) + check
    if constants:
        markdown += [f"All rows: {', '.join(f'`{k}={v}`' for k, v in constants.items())}.", ""]
    markdown += [format_markdown(shown)]
    markdown += [note + "\n" for note in notes]
    markdown += [f"![{figure.stem.replace('_', ' ')}]({figure.name})\n" for figure in figures]
    write_atomic(out / "summary.md", "\n".join(markdown))
    text = format_terminal(shown)
    head = _constants_line(constants)
    written = ", ".join(figure.name for figure in figures)
    return "\n".join(filter(None, [outcomes, head, text, *notes, f"plots: {written}" if written else ""]))


def with_per_class(table: pd.DataFrame, paths: pd.Series, records: pd.DataFrame) -> pd.DataFrame:
    """``table`` with each class's precision, recall and F1 (scikit-learn's, from the records'
    ``per_class``), averaged over a row's records: columns ``precision[NAME]``, ``recall[NAME]``,
    ``f1[NAME]``, named by the data's class names where the records keep them, else by code."""
    if "per_class" not in records or "path" not in records:
        return table
    known = {path: (figures, names) for path, figures, names in
             zip(records["path"], records["per_class"], records.get("class_names", pd.Series([None] * len(records))))
             if isinstance(figures, dict)}
    rows: list[dict[str, float]] = []
    for row_paths in paths:
        sums: dict[str, list[float]] = {}
        for path in row_paths:
            if path not in known:
                continue
            figures, names = known[path]
            for measure in ("precision", "recall", "f1"):
                for code, value in enumerate(figures.get(measure, [])):
                    name = names[code] if isinstance(names, list) and code < len(names) else str(code)
                    sums.setdefault(f"{measure}[{name}]", []).append(float(value))
        rows.append({column: float(np.mean(values)) for column, values in sums.items()})
    extra = pd.DataFrame(rows, index=table.index)
    return pd.concat([table, extra], axis=1) if not extra.empty else table


def graph_check_lines(records: pd.DataFrame) -> list[str]:
    """The graph check's section of the summary (heading, sentence, table), when a record's
    family reads a graph; none otherwise."""
    from shiftbench.graph_check import records_check, summary
    from shiftbench.registry import FAMILIES

    families = set(records.get("family", pd.Series(dtype=object)).dropna())
    if not any(name in FAMILIES and FAMILIES[name].uses_graph for name in families):
        return []
    check, why = records_check(records)
    if check is None:
        return ["## Graph check", "", f"Not run: {why}.", ""]
    found = summary(check)
    heading = f"## Graph check: {check.data} on its native graph ({check.graph}), before any training"
    return [heading, "", found["sentence"], "", *found["table"], "", *[f"- note: {note}" for note in check.notes]]

