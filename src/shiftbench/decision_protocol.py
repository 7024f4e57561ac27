"""The decision study's protocol: tuning (Optuna's TPE, equal budgets, validation only) and the
paired evaluation over outer folds, under ``nested`` or ``tune_once`` (see :mod:`decision`).

Every trial and every evaluation is an ordinary job on ``folds=K split=UNIT seed=S``: the test
part of outer fold UNIT never reaches a trial's score (trials are scored on validation), and
under ``nested`` a fold's setting is chosen on that fold's own validation part.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from omegaconf import DictConfig, OmegaConf

from shiftbench.decision import Candidate, DecisionError, Dimension, Settings, override_text
from shiftbench.records import FINAL_STATUSES
from shiftbench.registry import FAMILIES, Task

# Runs one job from its overrides and returns its record (the store skips what is done).
RunJob = Callable[[list[str]], dict[str, Any]]

# Record figures the verdict reads, per unit, besides the task's metric on test and validation.
COST_FIELDS = ("parameters", "train_seconds", "inference_seconds_per_sample")


def unit_fields(task: Task) -> tuple[str, ...]:
    """The record figures of a unit: ``test_<metric>``, ``val_<metric>`` and the costs."""
    return (f"test_{task.metric}", f"val_{task.metric}", *COST_FIELDS)


def unit_lines(candidate: Candidate, settings: Settings, unit: int, seed: int) -> list[str]:
    """The overrides that put a job of ``candidate`` on outer fold ``unit`` with ``seed``; a
    control gets the unit's own rewiring (``graph.seed=UNIT``)."""
    lines = [f"folds={settings.study.splits}", f"split={unit}", f"seed={seed}"]
    return [*lines, f"graph.seed={unit}"] if candidate.control_of else lines


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


def usable_figure(record: dict[str, Any], key: str) -> float | None:
    """``record[key]`` when the record is final and the figure a finite number, else None."""
    value = record.get(key)
    if record.get("status") not in FINAL_STATUSES or isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None


@dataclass
class Tuning:
    """One tuning of a candidate on one unit: the chosen overrides and every trial's validation
    figure in the order run (None for a failed trial)."""

    chosen: list[str]
    values: list[float | None] = field(default_factory=list)

    @property
    def failed(self) -> int:
        return sum(value is None for value in self.values)


def tune(
    candidate: Candidate, settings: Settings, unit: int, sampler_seed: int, run: RunJob, say: Callable[[str], None],
    configured: DictConfig | None = None,
) -> Tuning:
    """Choose ``candidate``'s setting on outer fold ``unit``'s validation figure of the task's
    metric, over ``trials`` TPE trials seeded by ``sampler_seed``. The first trial is the
    configured setting where the space holds it (``configured``: the candidate's composed
    config), so tuning never ends below the default on validation. Floors are not tuned here:
    they choose on validation inside their own job."""
    if FAMILIES[candidate.family].fit is not None:
        return Tuning([])
    import optuna

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    metric, trials = settings.task.metric, settings.study.trials
    direction = "maximize" if settings.task.higher_is_better else "minimize"
    study = optuna.create_study(direction=direction, sampler=optuna.samplers.TPESampler(seed=sampler_seed))
    space = settings.spaces[candidate.family]
    if configured is not None:
        study.enqueue_trial(configured_values(space, configured))
    values: list[float | None] = []
    for number in range(trials):
        trial = study.ask()
        lines = suggest(trial, space)
        record = run([*candidate.overrides, *lines, *unit_lines(candidate, settings, unit, 0)])
        value = usable_figure(record, f"val_{metric}")
        values.append(value)
        where = f"  fold {unit} trial {number + 1}/{trials} of {candidate.name}"
        if value is None:
            study.tell(trial, state=optuna.trial.TrialState.FAIL)
            say(f"{where}: failed ({record.get('error') or 'val ' + metric + ' ' + str(record.get(f'val_{metric}'))})")
            continue
        study.tell(trial, value)
        say(f"{where}: val {metric} {value:.3f}  {' '.join(lines)}")
    if all(value is None for value in values):
        raise DecisionError(f"every tuning trial of {candidate.name} on fold {unit} failed; see the failed records in the store")
    chosen = [f"{key}={override_text(value)}" for key, value in study.best_trial.params.items()]
    return Tuning(chosen, values)


def evaluate(candidate: Candidate, chosen: dict[int, list[str]], settings: Settings, run: RunJob) -> pd.DataFrame:
    """Retrain each unit's chosen setting with every seed; one row per unit and seed."""
    rows = []
    for unit in settings.units:
        for seed in range(settings.study.seeds):
            record = run([*candidate.overrides, *chosen[unit], *unit_lines(candidate, settings, unit, seed)])
            row = {"candidate": candidate.name, "split": unit, "seed": seed, "status": record.get("status"),
                   "error": record.get("error")}
            row.update({key: record.get(key) for key in unit_fields(settings.task)})
            rows.append(row)
    return pd.DataFrame(rows)


def run_protocol(
    settings: Settings, sampler_seed: int, run: RunJob, say: Callable[[str], None], configured: Callable[[Candidate], DictConfig],
) -> tuple[pd.DataFrame, dict[str, dict[int, Tuning]]]:
    """Tune and evaluate every candidate under the settings' protocol; returns the units (one
    row per candidate, unit and seed) and each candidate's tuning per tuned unit. A control
    takes its candidate's setting on every unit, unless ``tune_controls``."""
    tables, tunings = [], {}
    tuned_units = list(settings.units) if settings.study.protocol == "nested" else [0]
    for candidate in settings.candidates:
        if candidate.control_of and not settings.study.tune_controls:
            tunings[candidate.name] = tunings[candidate.control_of]
        else:
            if FAMILIES[candidate.family].fit is None:
                say(f"tuning {candidate.name} ({len(tuned_units)} x {settings.study.trials} trials)")
            tunings[candidate.name] = {
                unit: tune(candidate, settings, unit, sampler_seed, run, say, configured(candidate)) for unit in tuned_units
            }
        chosen = {unit: tunings[candidate.name][unit if unit in tunings[candidate.name] else 0].chosen for unit in settings.units}
        say(f"evaluating {candidate.name} on {len(settings.units)} folds x {settings.study.seeds} seeds")
        tables.append(evaluate(candidate, chosen, settings, run))
    return pd.concat(tables, ignore_index=True), tunings


def expected_best(values: list[float | None], higher_is_better: bool = True) -> np.ndarray:
    """The expected best validation figure of ``n`` trials drawn from the ``N`` run, for
    ``n = 1..N`` (Dodge et al. 2019, "Show your work", eq. 1):
    ``E[max of n] = sum_i v_(i) ((i/N)^n - ((i-1)/N)^n)`` over the figures sorted worst to best
    (a failed trial counts as the worst figure). Shape ``(N,)``."""
    finite = [value for value in values if value is not None]
    if not finite:
        return np.full(len(values), np.nan)
    sign = 1.0 if higher_is_better else -1.0
    worst = min(sign * value for value in finite)
    ordered = np.sort([sign * value if value is not None else worst for value in values])
    count = len(ordered)
    ranks = np.arange(1, count + 1) / count
    draws = np.arange(1, count + 1)[:, None]
    weights = ranks[None, :] ** draws - (ranks[None, :] - 1 / count) ** draws
    return sign * (weights @ ordered)
