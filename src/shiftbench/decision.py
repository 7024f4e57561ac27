"""The decision study: does a graph model earn its keep on this data?

1. Tuning with equal budgets: every trained candidate gets ``trials`` Optuna trials (TPE, seeded)
   over its search space, each trial a normal job on split 0, seed 0, scored by its validation
   figure of the task's metric only (accuracy, RMSE). Graph-free floors choose their own setting
   on the same validation split.
2. Repeated, paired evaluation: each candidate's chosen config is retrained on ``splits`` random
   splits x ``seeds`` seeds, the same units for every candidate.
3. Paired statistics against the best graph-free candidate (chosen on validation), Holm's
   correction over the comparisons made, a region of practical equivalence (``rope``, in the
   metric's units). Differences are taken so that positive is better (for an error: the
   reference's minus the candidate's), and said in the metric's own sign.
4. The verdict: one sentence per candidate, with the effect, its interval, p and the cost.

Every job goes through the store, so a rerun trains nothing that is done and resumes what was cut.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from omegaconf import DictConfig, OmegaConf

from shiftbench.config import validate
from shiftbench.errors import ConfigError
from shiftbench.records import FINAL_STATUSES
from shiftbench.registry import FAMILIES, TASKS, Task
from shiftbench.statistics import compare_paired, holm


class DecisionError(RuntimeError):
    """The study cannot reach a verdict (every trial of a candidate failed, or no graph-free
    candidate completed every unit); the message says which."""


# Record figures the verdict reads, per unit, besides the task's metric on test and validation.
COST_FIELDS = ("parameters", "train_seconds", "inference_seconds_per_sample")


def unit_fields(task: Task) -> tuple[str, ...]:
    """The record figures of a unit: ``test_<metric>``, ``val_<metric>`` and the costs."""
    return (f"test_{task.metric}", f"val_{task.metric}", *COST_FIELDS)


@dataclass(frozen=True)
class Candidate:
    """A candidate: its name, the overrides that make it, its family, and whether it reads a graph."""

    name: str
    overrides: tuple[str, ...]
    family: str
    uses_graph: bool


@dataclass(frozen=True)
class Dimension:
    """One axis of a search space: a range (``low``..``high``, log-scaled or integer) or choices
    (override texts)."""

    key: str
    low: float | None = None
    high: float | None = None
    log: bool = False
    integer: bool = False
    choices: tuple[str, ...] = ()


@dataclass
class Settings:
    """The study's settings (``decision/settings.yaml``, overridden by ``decision.KEY=VALUE``)."""

    candidates: list[Candidate]
    trials: int
    splits: int
    seeds: int
    rope: float
    alpha: float
    sampler_seed: int
    folder: str
    spaces: dict[str, list[Dimension]] = field(default_factory=dict)
    task: Task = field(default_factory=lambda: TASKS["classification"])


def override_text(value: Any) -> str:
    """A value as Hydra override text: lists without spaces, other values as YAML writes them."""
    if isinstance(value, (list, tuple)):
        return "[" + ",".join(override_text(item) for item in value) + "]"
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def read_space(path: Path) -> list[Dimension]:
    """A search space file: ``KEY: {low, high[, log][, integer]}`` or ``KEY: {choices: [...]}``."""
    content = OmegaConf.to_container(OmegaConf.load(path))
    if not isinstance(content, dict) or not content:
        raise ConfigError(f"search space {path}: is empty; accepted: KEY: {{low, high}} or KEY: {{choices: [...]}} lines")
    dimensions = []
    for key, spec in content.items():
        accepted = "{low: A, high: B[, log: true][, integer: true]} with A <= B, or {choices: [at least one]}"
        if not isinstance(spec, dict) or not (set(spec) <= {"low", "high", "log", "integer", "choices"}):
            raise ConfigError(f"search space {path.name}: {key}={spec!r} is not accepted; accepted: {accepted}")
        if "choices" in spec:
            if not isinstance(spec["choices"], list) or not spec["choices"]:
                raise ConfigError(f"search space {path.name}: {key}.choices={spec['choices']!r} is not accepted; accepted: a non-empty list")
            dimensions.append(Dimension(key, choices=tuple(override_text(value) for value in spec["choices"])))
            continue
        low, high = spec.get("low"), spec.get("high")
        if not isinstance(low, (int, float)) or not isinstance(high, (int, float)) or low > high or (spec.get("log") and low <= 0):
            raise ConfigError(f"search space {path.name}: {key}={spec!r} is not accepted; accepted: {accepted} (log needs A > 0)")
        dimensions.append(Dimension(key, float(low), float(high), bool(spec.get("log")), bool(spec.get("integer"))))
    return dimensions


def read_settings(settings_dir: Path, overrides: list[str], compose: Callable[[list[str]], DictConfig]) -> Settings:
    """The study's settings with ``decision.*`` overrides applied, every candidate composed once
    and its search space read and checked against its config, before any job runs."""
    base = OmegaConf.load(settings_dir / "settings.yaml")
    try:
        changes = OmegaConf.from_dotlist([line.removeprefix("decision.") for line in overrides])
        OmegaConf.set_struct(base, True)
        merged = OmegaConf.merge(base, changes)
    except Exception as error:  # OmegaConf's refusals of an unknown key or a wrong type
        raise ConfigError(f"{_first_line(error)}; accepted keys: decision.{', decision.'.join(base.keys())}") from None
    for key in ("trials", "splits", "seeds"):
        value = merged[key]
        if not isinstance(value, int) or isinstance(value, bool) or value < 1:
            raise ConfigError(f"decision.{key}={value!r} is not accepted; accepted: an integer >= 1")
    if not 0 <= merged.rope < 1:
        raise ConfigError(f"decision.rope={merged.rope!r} is not accepted; accepted: a number in [0, 1) (in the metric's units)")
    if not 0 < merged.alpha < 1:
        raise ConfigError(f"decision.alpha={merged.alpha!r} is not accepted; accepted: a number in (0, 1)")
    candidates, spaces, tasks = [], {}, set()
    for entry in merged.candidates:
        try:
            overrides = list(entry.overrides)
            composed = compose(overrides)
            family_tasks = FAMILIES[composed.arch.family].tasks if composed.arch.family in FAMILIES else None
            if family_tasks is not None and composed.task not in family_tasks:
                continue  # a floor for another task (ridge in a classification study, say)
            if node_task(composed) and "readout" in composed.arch:
                overrides.append("arch.readout=node")  # a value on every node: the per-node output map
                composed = compose(overrides)
            validate(composed)
            tasks.add(composed.task)
        except ConfigError as error:
            raise ConfigError(f"candidate {entry.name!r}: {error}") from None
        except Exception as error:  # Hydra's refusal of an override it cannot compose
            raise ConfigError(f"candidate {entry.name!r}: {_first_line(error)}") from None
        family = composed.arch.family
        candidates.append(Candidate(str(entry.name), tuple(overrides), family, FAMILIES[family].uses_graph))
        if FAMILIES[family].fit is None and family not in spaces:
            path = settings_dir / "search" / f"{family}.yaml"
            if not path.is_file():
                raise ConfigError(f"candidate {entry.name!r}: no search space {path}; accepted: a search/<family>.yaml file")
            # A node task keeps the per-node output map: the pooling readouts are not searched.
            spaces[family] = [dimension for dimension in read_space(path)
                              if not (node_task(composed) and dimension.key == "arch.readout")]
            for dimension in spaces[family]:
                if OmegaConf.select(composed, dimension.key, default="<absent>") == "<absent>":
                    raise ConfigError(
                        f"search space {path.name}: unknown key {dimension.key}; accepted: a key of the {family} job config"
                    )
    if not candidates or not any(not c.uses_graph for c in candidates):
        raise ConfigError("decision.candidates must hold at least one graph-free candidate to compare against")
    if len(tasks) > 1:
        raise ConfigError(f"decision.candidates learn different tasks ({', '.join(sorted(tasks))}); accepted: one task")
    if len({c.name for c in candidates}) != len(candidates):
        raise ConfigError("decision.candidates: two candidates share a name; accepted: distinct names")
    return Settings(
        candidates, merged.trials, merged.splits, merged.seeds, float(merged.rope), float(merged.alpha),
        int(merged.sampler_seed), str(merged.folder), spaces, TASKS[tasks.pop()],
    )


def node_task(composed: DictConfig) -> bool:
    """Whether the composed job config's task predicts a value on every node."""
    return TASKS[composed.task].head == "nodes" if composed.task in TASKS else False


def _first_line(error: Exception) -> str:
    return str(error).strip().splitlines()[0]


def suggest(trial: Any, space: list[Dimension]) -> list[str]:
    """The overrides an Optuna trial draws from ``space``."""
    lines = []
    for dimension in space:
        if dimension.choices:
            value: Any = trial.suggest_categorical(dimension.key, list(dimension.choices))
        elif dimension.integer:
            value = trial.suggest_int(dimension.key, int(dimension.low), int(dimension.high), log=dimension.log)
        else:
            value = trial.suggest_float(dimension.key, dimension.low, dimension.high, log=dimension.log)
        lines.append(f"{dimension.key}={override_text(value)}")
    return lines


# Runs one job from its overrides and returns its record (the store skips what is done).
RunJob = Callable[[list[str]], dict[str, Any]]


def configured_values(space: list[Dimension], configured: DictConfig) -> dict[str, Any]:
    """The configured value of each dimension that the space can hold (a choice it lists, or a
    number inside its range): the first trial starts from what the user configured."""
    values = {}
    for dimension in space:
        value = OmegaConf.select(configured, dimension.key)
        value = OmegaConf.to_container(value) if OmegaConf.is_config(value) else value
        if dimension.choices:
            if override_text(value) in dimension.choices:
                values[dimension.key] = override_text(value)
        elif isinstance(value, (int, float)) and dimension.low <= value <= dimension.high:
            values[dimension.key] = int(value) if dimension.integer else float(value)
    return values


def tune(
    candidate: Candidate, settings: Settings, run: RunJob, say: Callable[[str], None], configured: DictConfig | None = None
) -> tuple[list[str], dict]:
    """Choose ``candidate``'s setting on the validation figure of the task's metric; returns the
    chosen overrides and a summary (trials run, failed trials, ``best_val_<metric>``). The first trial is the
    configured setting where the space holds it (``configured``: the candidate's composed
    config), so tuning never ends below the default on validation. Floors are not tuned here:
    they choose on validation inside their own job."""
    metric = settings.task.metric
    if FAMILIES[candidate.family].fit is not None:
        return [], {"trials": 0, "failed": 0, f"best_val_{metric}": None, "note": "chooses its setting on validation itself"}
    import optuna

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    sampler = optuna.samplers.TPESampler(seed=settings.sampler_seed)
    direction = "maximize" if settings.task.higher_is_better else "minimize"
    study = optuna.create_study(direction=direction, sampler=sampler)
    if configured is not None:
        study.enqueue_trial(configured_values(settings.spaces[candidate.family], configured))
    failed = 0
    for number in range(settings.trials):
        trial = study.ask()
        lines = suggest(trial, settings.spaces[candidate.family])
        record = run([*candidate.overrides, *lines, "split=0", "seed=0"])
        value = record.get(f"val_{metric}")
        if record.get("status") not in FINAL_STATUSES or not isinstance(value, (int, float)) or not math.isfinite(value):
            failed += 1
            study.tell(trial, state=optuna.trial.TrialState.FAIL)
            say(f"  trial {number + 1}/{settings.trials} of {candidate.name}: failed ({record.get('error')})")
            continue
        study.tell(trial, float(value))
        say(f"  trial {number + 1}/{settings.trials} of {candidate.name}: val {metric} {value:.3f}  {' '.join(lines)}")
    if failed == settings.trials:
        raise DecisionError(f"every tuning trial of {candidate.name} failed; see the failed records in the store")
    best = study.best_trial
    chosen = [f"{key}={override_text(value)}" for key, value in best.params.items()]
    return chosen, {"trials": settings.trials, "failed": failed, f"best_val_{metric}": best.value}


def evaluate(candidate: Candidate, chosen: list[str], settings: Settings, run: RunJob) -> pd.DataFrame:
    """Retrain the chosen setting on every (split, seed) unit; one row per unit."""
    rows = []
    for split in range(settings.splits):
        for seed in range(settings.seeds):
            record = run([*candidate.overrides, *chosen, f"split={split}", f"seed={seed}"])
            row = {"candidate": candidate.name, "split": split, "seed": seed, "status": record.get("status"),
                   "error": record.get("error")}
            row.update({key: record.get(key) for key in unit_fields(settings.task)})
            rows.append(row)
    return pd.DataFrame(rows)


def usable_units(units: pd.DataFrame, task: Task) -> pd.DataFrame:
    """The units a verdict may use: a final status and finite test and validation figures. The
    figures are made numeric first (a failed run's ``None`` would otherwise make its column an
    object column, which pandas' numeric means drop for every candidate)."""
    frame = units.copy()
    for column in unit_fields(task):
        frame[column] = pd.to_numeric(frame[column], errors="coerce") if column in frame else np.nan
    finite = np.isfinite(frame[f"test_{task.metric}"]) & np.isfinite(frame[f"val_{task.metric}"])
    return frame[frame["status"].isin(FINAL_STATUSES) & finite]


def _failure_reason(units: pd.DataFrame, name: str) -> str:
    """`` (first error: ...)`` from the candidate's failed units, or nothing when none says why."""
    errors = [str(error) for error in units.loc[units["candidate"] == name, "error"] if isinstance(error, str) and error] \
        if "error" in units else []
    return f" (first error: {errors[0].strip().splitlines()[0][:200]})" if errors else ""


def _ratio(value: float | None, reference: float | None) -> float | None:
    if value is None or reference is None or not reference or any(map(math.isnan, (value, reference))):
        return None
    return value / reference


def verdict(
    units: pd.DataFrame, candidates: list[Candidate], rope: float, alpha: float, task: Task | None = None
) -> dict[str, Any]:
    """Compare every candidate with the best graph-free one, over paired units.

    ``units`` has one row per candidate and unit (``candidate, split, seed, status`` and
    :func:`unit_fields`). The reference is the graph-free candidate with the best mean
    validation figure of the task's metric (the test split never chooses). For each other
    candidate: the paired comparison of the test figure (signed so that positive is better),
    Holm-adjusted t-test p over the comparisons made, and the decision rule:

    - earns its keep: the interval lies above ``rope`` and Holm p < ``alpha``;
    - equivalent within the ROPE: the interval lies inside ``[-rope, rope]``;
    - does not earn its keep: the interval lies below ``rope`` (not better by a practical margin);
    - undecided: otherwise (the interval crosses the ROPE's edge).

    A candidate missing units that the others have is not compared; its entry names them.
    """
    task = task or TASKS["classification"]
    test, val = f"test_{task.metric}", f"val_{task.metric}"
    sign = 1.0 if task.higher_is_better else -1.0
    completed = usable_units(units, task)
    all_units = sorted({(int(s), int(d)) for s, d in zip(units["split"], units["seed"])})
    present = {
        name: {(int(s), int(d)) for s, d in zip(group["split"], group["seed"])}
        for name, group in completed.groupby("candidate")
    }
    missing = {c.name: sorted(set(all_units) - present.get(c.name, set())) for c in candidates}
    floors = [c for c in candidates if not c.uses_graph and not missing[c.name]]
    if not floors:
        raise DecisionError("no graph-free candidate completed every unit; rerun the study to fill the failed ones")
    means = completed.groupby("candidate")[list(unit_fields(task))].mean(numeric_only=True)
    reference = max(floors, key=lambda c: (sign * means.loc[c.name, val], -candidates.index(c))).name

    def figures(name: str) -> np.ndarray:
        """The candidate's test figures over the units, signed so that larger is better."""
        group = completed[completed["candidate"] == name].sort_values(["split", "seed"])
        return sign * group[test].to_numpy(dtype=float)

    entries: list[dict[str, Any]] = []
    compared = [c for c in candidates if c.name != reference and not missing[c.name]]
    comparisons = {c.name: compare_paired(figures(c.name), figures(reference), rope) for c in compared}
    adjusted = dict(zip(comparisons, holm([comparison.t_p for comparison in comparisons.values()])))
    for candidate in sorted(candidates, key=lambda c: (not c.uses_graph, candidates.index(c))):
        name = candidate.name
        entry: dict[str, Any] = {"candidate": name, "family": candidate.family, "uses_graph": candidate.uses_graph}
        if name == reference:
            entry.update(outcome="reference", sentence=_reference_sentence(name, means, task))
        elif missing[name]:
            shown = ", ".join(f"split {s} seed {d}" for s, d in missing[name])
            reason = _failure_reason(units, name)
            entry.update(outcome="missing_units", missing=[list(unit) for unit in missing[name]],
                         sentence=f"{name} cannot be compared: it has no completed run for {shown}{reason}; "
                                  "it is left out of the comparisons.")
        else:
            comparison = comparisons[name]
            outcome = decide(comparison.low, comparison.high, adjusted[name], rope, alpha)
            cost = {
                "parameters": _value(means, name, "parameters"),
                "reference_parameters": _value(means, reference, "parameters"),
                "train_seconds_ratio": _ratio(_value(means, name, "train_seconds"), _value(means, reference, "train_seconds")),
                "inference_ratio": _ratio(
                    _value(means, name, "inference_seconds_per_sample"), _value(means, reference, "inference_seconds_per_sample")
                ),
            }
            entry.update(outcome=outcome, comparison=comparison.as_dict(), holm_p=adjusted[name], cost=cost,
                         units=len(comparison.differences),
                         sentence=sentence(name, reference, outcome, comparison, adjusted[name], cost, task))
        entries.append(entry)
    return {"reference": reference, "rope": rope, "alpha": alpha, "units": len(all_units), "candidates": entries,
            "metric": task.metric, "better": "higher" if task.higher_is_better else "lower",
            f"mean_test_{task.metric}": {name: _value(means, name, test) for name in means.index}}


def decide(low: float, high: float, holm_p: float, rope: float, alpha: float) -> str:
    """The decision rule of :func:`verdict` on an interval ``[low, high]`` of the difference."""
    if any(math.isnan(x) for x in (low, high)):
        return "undecided"
    if low > rope and holm_p < alpha:
        return "earns_its_keep"
    if -rope <= low and high <= rope:
        return "equivalent"
    if high < rope:
        return "does_not_earn_its_keep"
    return "undecided"


def _value(means: pd.DataFrame, name: str, column: str) -> float | None:
    if name not in means.index or column not in means.columns or pd.isna(means.loc[name, column]):
        return None
    return float(means.loc[name, column])


def _reference_sentence(name: str, means: pd.DataFrame, task: Task) -> str:
    figure = _value(means, name, f"test_{task.metric}")
    return (f"{name} is the strongest graph-free candidate on validation (mean test {task.metric} {figure:.3f}): "
            "the others are compared with it.")


def _times(ratio: float) -> str:
    return f"{ratio:,.0f}x" if ratio >= 10 else f"{ratio:.2g}x"


def _cost_phrase(cost: dict[str, Any]) -> str:
    parameters, reference = cost["parameters"], cost["reference_parameters"]
    if parameters and reference:
        size = f"{_times(parameters / reference)} the parameters"
    elif parameters:
        size = f"{parameters:,.0f} trainable parameters against none"
    else:
        size = "no trainable parameters"
    time, inference = cost["train_seconds_ratio"], cost["inference_ratio"]
    phrase = size + ("" if time is None else f", {_times(time)} the training time")
    return phrase + ("" if inference is None else f" and {_times(inference)} the inference time per sample")


def sentence(
    name: str, reference: str, outcome: str, comparison: Any, holm_p: float, cost: dict[str, Any], task: Task | None = None
) -> str:
    """One sentence: the outcome, the effect with its interval (the candidate's figure minus the
    reference's, in the metric's own sign), units, Holm p, and the cost."""
    task = task or TASKS["classification"]
    words = {
        "earns_its_keep": "earns its keep over",
        "does_not_earn_its_keep": "does not earn its keep over",
        "equivalent": "is equivalent within the ROPE to",
        "undecided": "is undecided against",
    }[outcome]
    # The comparison is of signed figures (larger is better); an error is said as it is.
    mean, low, high = (comparison.mean, comparison.low, comparison.high) if task.higher_is_better else (
        -comparison.mean, -comparison.high, -comparison.low)
    evidence = (
        f"{mean:+.3f} test {task.metric} (95% CI {low:.3f} to {high:.3f}, "
        f"{len(comparison.differences)} paired runs, Holm p = {holm_p:.3g})"
    )
    tail = ": more runs needed (the interval crosses the ROPE)" if outcome == "undecided" else ""
    return f"{name} {words} {reference}{tail}: {evidence}, with {_cost_phrase(cost)}."


def write_verdict(result: dict[str, Any], folder: Path) -> str:
    """Write ``verdict.json`` and ``verdict.md`` into ``folder``; return the markdown."""
    from shiftbench.records import write_atomic

    write_atomic(folder / "verdict.json", json.dumps(result, indent=2, default=float) + "\n")
    lines = ["# Verdict", ""]
    lines += [f"- {entry['sentence']}" for entry in result["candidates"]]
    # Accuracy goes without saying (the verdicts of classification read as they always have).
    metric = "" if result.get("metric", "accuracy") == "accuracy" else f" test {result['metric']}, {result['better']} is better"
    lines += ["", f"Reference: {result['reference']} (best graph-free candidate on validation). ROPE ±{result['rope']}{metric}, "
              f"alpha {result['alpha']}, {result['units']} paired units (split x seed); p-values Holm-adjusted over "
              f"{sum('holm_p' in e for e in result['candidates'])} comparisons."]
    markdown = "\n".join(lines) + "\n"
    write_atomic(folder / "verdict.md", markdown)
    return markdown
