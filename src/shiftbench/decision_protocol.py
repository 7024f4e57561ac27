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

# Runs a batch of jobs, each from its overrides, and returns their records in the same order
# (the store skips what is done).
RunBatch = Callable[[list[list[str]]], list[dict[str, Any]]]

# Record figures the verdict reads, per unit, besides the task's metric on test and validation.
COST_FIELDS = ("parameters", "train_seconds", "train_cpu_seconds", "inference_seconds_per_sample")


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
    """One tuning of a candidate on one unit: the chosen overrides, every trial's validation
    figure in the order run (None for a failed trial), its Optuna study (None for a floor),
    and how many other trials tied with the chosen one at the best figure."""

    chosen: list[str]
    values: list[float | None] = field(default_factory=list)
    study: Any = None
    tied: int = 0

    @property
    def failed(self) -> int:
        return sum(value is None for value in self.values)


def tune_all(
    tasks: list[tuple[Candidate, int]], settings: Settings, sampler_seed: int, run: RunBatch, say: Callable[[str], None],
    configured: Callable[[Candidate], DictConfig],
) -> dict[tuple[str, int], Tuning]:
    """Tune every ``(candidate, unit)`` of ``tasks`` on outer fold ``unit``'s validation figure
    of the task's metric, over ``trials`` TPE trials seeded by ``sampler_seed``; returns each
    task's tuning. The first trial is the configured setting where the space holds it, so
    tuning never ends below the default on validation. Floors are not tuned here: they choose
    on validation inside their own job.

    The tunings advance together, ``parallel_trials`` trials each per batch handed to ``run``
    (TPE with ``constant_liar``: trials in flight count among the bad ones, so a batch does
    not draw one point several times): each tuning asks and tells in the same order as it would alone, so the choices do
    not depend on how many jobs run at once."""
    import optuna

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    metric, trials, at_once = settings.task.metric, settings.study.trials, settings.study.parallel_trials
    direction = "maximize" if settings.task.higher_is_better else "minimize"
    tuned = [(candidate, unit) for candidate, unit in tasks if FAMILIES[candidate.family].fit is None]
    studies, values, sizes = {}, {}, {}
    for candidate, unit in tuned:
        sampler = optuna.samplers.TPESampler(seed=sampler_seed, constant_liar=True)
        study = optuna.create_study(direction=direction, sampler=sampler)
        held = configured_values(settings.spaces[candidate.family], configured(candidate))
        if held:
            study.enqueue_trial(held)
        studies[candidate.name, unit], values[candidate.name, unit], sizes[candidate.name, unit] = study, [], []
    for first in range(0, trials if tuned else 0, at_once):
        numbers = range(first, min(first + at_once, trials))
        jobs = [(candidate, unit, number) for candidate, unit in tuned for number in numbers]
        asked = {(candidate.name, unit, number): studies[candidate.name, unit].ask() for candidate, unit, number in jobs}
        lines = {(candidate.name, unit, number): suggest(asked[candidate.name, unit, number], settings.spaces[candidate.family])
                 for candidate, unit, number in jobs}
        records = run([[*candidate.overrides, *lines[candidate.name, unit, number], *unit_lines(candidate, settings, unit, 0)]
                       for candidate, unit, number in jobs])
        for (candidate, unit, number), record in zip(jobs, records):
            key, trial = (candidate.name, unit), asked[candidate.name, unit, number]
            value = usable_figure(record, f"val_{metric}")
            values[key].append(value)
            sizes[key].append(record.get("parameters"))
            where = f"  fold {unit} trial {number + 1}/{trials} of {candidate.name}"
            if value is None:
                studies[key].tell(trial, state=optuna.trial.TrialState.FAIL)
                say(f"{where}: failed ({record.get('error') or 'val ' + metric + ' ' + str(record.get(f'val_{metric}'))})")
            else:
                studies[key].tell(trial, value)
                say(f"{where}: val {metric} {value:.3f}  {' '.join(lines[candidate.name, unit, number])}")
    tunings = {(candidate.name, unit): Tuning([]) for candidate, unit in tasks}
    for (name, unit), study in studies.items():
        if all(value is None for value in values[name, unit]):
            raise DecisionError(f"every tuning trial of {name} on fold {unit} failed; see the failed records in the store")
        number, tied = tie_broken_best(values[name, unit], sizes[name, unit], settings.task.higher_is_better)
        chosen = [f"{key}={override_text(value)}" for key, value in study.trials[number].params.items()]
        tunings[name, unit] = Tuning(chosen, values[name, unit], study, tied)
    return tunings


def tie_broken_best(values: list[float | None], parameters: list[Any], higher_is_better: bool) -> tuple[int, int]:
    """The trial a tuning chooses: the best validation figure; among trials tied at it (equal to
    1e-12), the one with the fewest parameters, then the earliest. Returns its number and how
    many others tied with it. ``values`` holds at least one figure."""
    sign = 1.0 if higher_is_better else -1.0
    best = max(sign * value for value in values if value is not None)
    level = [number for number, value in enumerate(values) if value is not None and abs(sign * value - best) <= 1e-12]
    size = lambda number: parameters[number] if isinstance(parameters[number], (int, float)) else math.inf
    chosen = min(level, key=lambda number: (size(number), number))
    return chosen, len(level) - 1


def evaluate_all(chosen: dict[str, dict[int, list[str]]], settings: Settings, run: RunBatch) -> pd.DataFrame:
    """Retrain each candidate's chosen setting of each unit with every seed, all in one batch;
    one row per candidate, unit and seed."""
    jobs = [(candidate, unit, seed) for candidate in settings.candidates for unit in settings.units
            for seed in range(settings.study.seeds)]
    records = run([[*candidate.overrides, *chosen[candidate.name][unit], *unit_lines(candidate, settings, unit, seed)]
                   for candidate, unit, seed in jobs])
    rows = []
    for (candidate, unit, seed), record in zip(jobs, records):
        row = {"candidate": candidate.name, "split": unit, "seed": seed, "status": record.get("status"),
               "error": record.get("error")}
        row.update({key: record.get(key) for key in unit_fields(settings.task)})
        rows.append(row)
    return pd.DataFrame(rows)


def run_protocol(
    settings: Settings, sampler_seed: int, run: RunBatch, say: Callable[[str], None], configured: Callable[[Candidate], DictConfig],
) -> tuple[pd.DataFrame, dict[str, dict[int, Tuning]]]:
    """Tune and evaluate every candidate under the settings' protocol; returns the units (one
    row per candidate, unit and seed) and each candidate's tuning per tuned unit. A control
    takes its candidate's setting on every unit, unless ``tune_controls``."""
    tuned_units = list(settings.units) if settings.study.protocol == "nested" else [0]
    own = [candidate for candidate in settings.candidates if not candidate.control_of or settings.study.tune_controls]
    trained = [candidate.name for candidate in own if FAMILIES[candidate.family].fit is None]
    if trained:
        say(f"tuning {', '.join(trained)} ({len(tuned_units)} x {settings.study.trials} trials each)")
    found = tune_all([(candidate, unit) for candidate in own for unit in tuned_units], settings, sampler_seed, run, say, configured)
    tunings: dict[str, dict[int, Tuning]] = {}
    for candidate in settings.candidates:
        source = candidate.name if candidate in own else candidate.control_of
        tunings[candidate.name] = {unit: found[source, unit] for unit in tuned_units}
    chosen = {name: {unit: per_unit[unit if unit in per_unit else 0].chosen for unit in settings.units}
              for name, per_unit in tunings.items()}
    say(f"evaluating {len(settings.candidates)} candidates on {len(settings.units)} folds x {settings.study.seeds} seeds")
    return evaluate_all(chosen, settings, run), tunings


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
