"""The decision study's verdict: two questions over the same paired units (outer folds, seeds
averaged within a fold).

1. Does a graph model beat the best graph-free model? Every candidate against the graph-free
   candidate best on validation (the test parts never choose).
2. Is it the user's graph? Every candidate that reads the native graph against itself on a
   degree-preserving rewiring (its control).

Each comparison: the corrected repeated cross-validation t-test (:func:`statistics.compare_paired`),
Holm's correction over every comparison made, the Bayesian correlated t-test's probabilities
beside it, and the decision rule on the corrected interval and a region of practical equivalence
(``rope``, in the metric's units). Differences are signed so that positive is better (for an
error: the reference's minus the candidate's) and said in the metric's own sign.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from shiftbench.decision import Candidate, DecisionError, StudyConfig
from shiftbench.decision_protocol import unit_fields
from shiftbench.records import FINAL_STATUSES
from shiftbench.registry import Task
from shiftbench.statistics import PairedComparison, compare_paired, holm, units_to_decide


def usable_units(units: pd.DataFrame, task: Task) -> pd.DataFrame:
    """The rows a verdict may use: a final status and finite test and validation figures. The
    figures are made numeric first (a failed run's ``None`` would otherwise make its column an
    object column, which pandas' numeric means drop for every candidate)."""
    frame = units.copy()
    for column in unit_fields(task):
        frame[column] = pd.to_numeric(frame[column], errors="coerce") if column in frame else np.nan
    finite = np.isfinite(frame[f"test_{task.metric}"]) & np.isfinite(frame[f"val_{task.metric}"])
    return frame[frame["status"].isin(FINAL_STATUSES) & finite]


def fold_figures(units: pd.DataFrame, task: Task) -> tuple[pd.DataFrame, dict[str, list[int]]]:
    """Each candidate's figures per outer fold, its seeds averaged (the fold is the unit of
    replication), and the folds each candidate is missing (a fold counts only when every seed
    of it is usable). Returns a frame indexed by ``(candidate, split)`` and the missing folds."""
    usable = usable_units(units, task)
    seeds = units["seed"].nunique()
    folds = sorted({int(split) for split in units["split"]})
    counts = usable.groupby(["candidate", "split"]).size()
    complete = counts[counts == seeds].index
    per_fold = usable.groupby(["candidate", "split"])[list(unit_fields(task))].mean().loc[complete]
    missing = {
        name: [fold for fold in folds if (name, fold) not in complete]
        for name in units["candidate"].unique()
    }
    return per_fold, missing


def verdict(units: pd.DataFrame, candidates: list[Candidate], study: StudyConfig, task: Task,
            uncontrolled: dict[str, str] | None = None) -> dict[str, Any]:
    """Answer both questions for every candidate (see the module's docstring).

    ``units`` has one row per candidate, outer fold (``split``) and seed: ``status`` and
    :func:`decision_protocol.unit_fields`. Decision rule (:func:`decide`) on the corrected
    interval with the Holm-adjusted corrected p. A candidate missing folds is named and left
    out; a control that could not be built or is missing folds is named in its candidate's
    graph sentence.
    """
    uncontrolled = uncontrolled or {}
    test, val = f"test_{task.metric}", f"val_{task.metric}"
    sign = 1.0 if task.higher_is_better else -1.0
    per_fold, missing = fold_figures(units, task)
    for candidate in candidates:
        missing.setdefault(candidate.name, sorted({int(split) for split in units["split"]}))
    floors = [c for c in candidates if not c.uses_graph and not missing[c.name]]
    if not floors:
        raise DecisionError("no graph-free candidate completed every fold; rerun the study to fill the failed ones")
    means = per_fold.groupby(level="candidate").mean()
    reference, tied = strongest(floors, means, val, sign)

    def figures(name: str) -> np.ndarray:
        """The candidate's test figures per fold, signed so that larger is better."""
        return sign * per_fold.loc[name].sort_index()[test].to_numpy(dtype=float)

    def paired(name: str, other: str) -> PairedComparison:
        return compare_paired(figures(name), figures(other), study.rope, study.splits, study.repetitions)

    ready = {c.name for c in candidates if not missing[c.name]}
    against_reference = {c.name: paired(c.name, reference) for c in candidates
                         if c.name != reference and not c.control_of and c.name in ready}
    controls = {c.control_of: c.name for c in candidates if c.control_of}
    against_control = {name: paired(name, control) for name, control in controls.items() if {name, control} <= ready}
    keys = [("reference", name) for name in against_reference] + [("graph", name) for name in against_control]
    found = [*against_reference.values(), *against_control.values()]
    adjusted = dict(zip(keys, holm([comparison.p for comparison in found])))

    entries = []
    for candidate in sorted(candidates, key=lambda c: (not c.uses_graph, bool(c.control_of), candidates.index(c))):
        name = candidate.name
        entry: dict[str, Any] = {"candidate": name, "family": candidate.family, "uses_graph": candidate.uses_graph}
        if candidate.control_of:
            entry.update(outcome="control", control_of=candidate.control_of,
                         sentence=_control_sentence(name, candidate.control_of, _value(means, name, test), task))
        elif name == reference:
            entry.update(outcome="reference", tied=tied, sentence=_reference_sentence(name, means, task, tied))
        elif missing[name]:
            entry.update(outcome="missing_units", missing=missing[name],
                         sentence=f"{name} cannot be compared: it has no usable run for folds "
                                  f"{', '.join(map(str, missing[name]))}{_failure_reason(units, name)}; it is left out of the comparisons.")
        else:
            comparison, holm_p = against_reference[name], adjusted[("reference", name)]
            outcome = decide(comparison, holm_p, study.rope, study.alpha)
            cost = _cost(means, name, reference)
            entry.update(outcome=outcome, comparison=comparison.as_dict(), holm_p=holm_p, cost=cost, units=len(comparison.differences),
                         sentence=sentence(name, reference, outcome, comparison, holm_p, cost, task, study))
        if candidate.uses_graph and not candidate.control_of:
            entry["graph"] = graph_entry(name, controls.get(name), against_control.get(name), adjusted.get(("graph", name)),
                                         uncontrolled.get(name), missing, units, task, study)
        entries.append(entry)
    return {"reference": reference, "rope": study.rope, "alpha": study.alpha, "folds": study.splits,
            "repetitions": study.repetitions, "seeds": study.seeds, "units": len(set(units["split"])),
            "comparisons": len(found), "candidates": entries, "metric": task.metric,
            "better": "higher" if task.higher_is_better else "lower",
            f"mean_test_{task.metric}": {name: _value(means, name, test) for name in means.index}}


def graph_entry(name: str, control: str | None, comparison: PairedComparison | None, holm_p: float | None,
                reason: str | None, missing: dict[str, list[int]], units: pd.DataFrame, task: Task, study: StudyConfig) -> dict[str, Any]:
    """The second question for one graph candidate: its comparison with its control, or why there is none."""
    if control is None:
        return {"outcome": "no_control", "sentence": f"{name}: whether the graph itself matters is not tested: {reason}."}
    if comparison is None:
        gone = control if missing.get(control) else name
        return {"outcome": "no_control", "control": control,
                "sentence": f"{name}: whether the graph itself matters is not tested: {gone} has no usable run for folds "
                            f"{', '.join(map(str, missing[gone]))}{_failure_reason(units, gone)}."}
    outcome = decide(comparison, holm_p, study.rope, study.alpha)
    return {"outcome": outcome, "control": control, "comparison": comparison.as_dict(), "holm_p": holm_p,
            "sentence": graph_sentence(name, outcome, comparison, holm_p, task, study)}


def decide(comparison: PairedComparison, holm_p: float, rope: float, alpha: float) -> str:
    """The decision rule on the corrected interval ``[low, high]`` of the difference (HDI+ROPE,
    Kruschke 2018, with a Holm-adjusted p for the positive claim):

    - earns its keep: the interval lies above ``rope`` and Holm p < ``alpha``;
    - equivalent within the ROPE: the interval lies inside ``[-rope, rope]``;
    - does not earn its keep: the interval lies below ``rope`` (not better by a practical margin);
    - undecided: otherwise, and always for too few or identical units.
    """
    low, high = comparison.low, comparison.high
    if comparison.degenerate or any(math.isnan(x) for x in (low, high)):
        return "undecided"
    if low > rope and holm_p < alpha:
        return "earns_its_keep"
    if -rope <= low and high <= rope:
        return "equivalent"
    if high < rope:
        return "does_not_earn_its_keep"
    return "undecided"


def undecided_reason(comparison: PairedComparison, holm_p: float, study: StudyConfig) -> str:
    """Why a comparison is undecided, and what would decide it."""
    if comparison.degenerate:
        return f"too few or identical units ({comparison.degenerate})"
    if comparison.low > study.rope:
        return f"the interval clears the ROPE but Holm p = {holm_p:.3g} is not below alpha {study.alpha}"
    needed = units_to_decide(np.asarray(comparison.differences), study.rope, study.splits, study.repetitions)
    if needed is None:
        return (f"the interval crosses the ROPE's edge, and at this spread no number of repetitions of {study.splits} folds "
                "would decide it (more data or more folds would)")
    return (f"the interval crosses the ROPE's edge; about {needed} units ({needed // study.splits} repetitions of "
            f"{study.splits} folds) would decide it at this effect and spread")


def _signed(comparison: PairedComparison, task: Task) -> tuple[float, float, float]:
    """Mean and interval in the metric's own sign (the comparison's are signed larger-is-better)."""
    if task.higher_is_better:
        return comparison.mean, comparison.low, comparison.high
    return -comparison.mean, -comparison.high, -comparison.low


def evidence(comparison: PairedComparison, holm_p: float, task: Task, study: StudyConfig) -> str:
    """The effect in the metric's sign, its corrected interval, the p-values and the Bayesian probability."""
    mean, low, high = _signed(comparison, task)
    units = f"{study.splits} folds x {study.repetitions} repetition{'s' * (study.repetitions > 1)}"
    if comparison.degenerate:
        return f"{mean:+.3f} test {task.metric} ({units}, {comparison.degenerate})"
    return (f"{mean:+.3f} test {task.metric} (95% CI {low:.3f} to {high:.3f} corrected for resampling, {units}, "
            f"p = {comparison.p:.3g}, Holm p = {holm_p:.3g}; probability {comparison.p_better:.2f} better by more than "
            f"{study.rope:g}, {comparison.p_equivalent:.2f} equivalent, {comparison.p_worse:.2f} worse)")


def sentence(name: str, reference: str, outcome: str, comparison: PairedComparison, holm_p: float, cost: dict[str, Any],
             task: Task, study: StudyConfig) -> str:
    """The first question's sentence: the outcome, the evidence and the cost."""
    words = {
        "earns_its_keep": "earns its keep over",
        "does_not_earn_its_keep": "does not earn its keep over",
        "equivalent": "is equivalent within the ROPE to",
        "undecided": "is undecided against",
    }[outcome]
    tail = f" ({undecided_reason(comparison, holm_p, study)})" if outcome == "undecided" else ""
    return f"{name} {words} {reference}{tail}: {evidence(comparison, holm_p, task, study)}, with {_cost_phrase(cost)}."


def graph_sentence(name: str, outcome: str, comparison: PairedComparison, holm_p: float, task: Task, study: StudyConfig) -> str:
    """The second question's sentence: does the graph add anything beyond its degrees?"""
    said = evidence(comparison, holm_p, task, study)
    if outcome == "earns_its_keep":
        return f"{name}: the graph itself adds {said} over a degree-preserving rewiring of it."
    if outcome == "equivalent":
        return f"{name}: your graph adds nothing beyond its degrees (equivalent within the ROPE to a rewiring of it): {said}."
    if outcome == "does_not_earn_its_keep":
        return f"{name}: your graph adds nothing measurable beyond its degrees (against a rewiring of it): {said}."
    return (f"{name}: whether your graph adds anything beyond its degrees is undecided "
            f"({undecided_reason(comparison, holm_p, study)}): {said} over a rewiring of it.")


def _failure_reason(units: pd.DataFrame, name: str) -> str:
    """`` (first error: ...)`` from the candidate's failed units, or nothing when none says why."""
    errors = [str(error) for error in units.loc[units["candidate"] == name, "error"] if isinstance(error, str) and error] \
        if "error" in units else []
    return f" (first error: {errors[0].strip().splitlines()[0][:200]})" if errors else ""


def _ratio(value: float | None, reference: float | None) -> float | None:
    if value is None or reference is None or not reference or any(map(math.isnan, (value, reference))):
        return None
    return value / reference


def _value(means: pd.DataFrame, name: str, column: str) -> float | None:
    if name not in means.index or column not in means.columns or pd.isna(means.loc[name, column]):
        return None
    return float(means.loc[name, column])


def _cost(means: pd.DataFrame, name: str, reference: str) -> dict[str, Any]:
    return {
        "parameters": _value(means, name, "parameters"),
        "reference_parameters": _value(means, reference, "parameters"),
        "train_seconds_ratio": _ratio(_value(means, name, "train_seconds"), _value(means, reference, "train_seconds")),
        "train_cpu_ratio": _ratio(_value(means, name, "train_cpu_seconds"), _value(means, reference, "train_cpu_seconds")),
        "inference_ratio": _ratio(_value(means, name, "inference_seconds_per_sample"),
                                  _value(means, reference, "inference_seconds_per_sample")),
    }


def strongest(floors: list[Candidate], means: pd.DataFrame, val: str, sign: float) -> tuple[str, list[str]]:
    """The graph-free candidate best on validation, and the others tied with it. A tie goes to
    the one cheapest to train (mean training CPU seconds, a test-free cost), then to the first name
    in alphabetical order: never to the order the candidates were listed in."""
    best = max(sign * means.loc[c.name, val] for c in floors)
    level = [c.name for c in floors if abs(sign * means.loc[c.name, val] - best) <= 1e-12]
    seconds = lambda name: _value(means, name, "train_cpu_seconds") or _value(means, name, "train_seconds") or 0.0
    chosen = min(level, key=lambda name: (seconds(name), name))
    return chosen, [name for name in sorted(level) if name != chosen]


def _reference_sentence(name: str, means: pd.DataFrame, task: Task, tied: list[str]) -> str:
    figure = _value(means, name, f"test_{task.metric}")
    tie = (f" It ties on validation with {', '.join(tied)}; of the tied, the one cheapest to train is the reference."
           if tied else "")
    return (f"{name} is the strongest graph-free candidate on validation (mean test {task.metric} {figure:.3f}): "
            f"the others are compared with it.{tie}")


def _control_sentence(name: str, of: str, figure: float | None, task: Task) -> str:
    shown = "no usable runs" if figure is None else f"mean test {task.metric} {figure:.3f}"
    return f"{name} is {of} on a degree-preserving rewiring of its graph, a new one per fold ({shown}): its control."


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
    # CPU time where the records have it: wall time grows with whatever else the machine runs.
    cpu, inference = cost.get("train_cpu_ratio"), cost["inference_ratio"]
    time = cpu if cpu is not None else cost["train_seconds_ratio"]
    said = "the training CPU time" if cpu is not None else "the training time"
    phrase = size + ("" if time is None else f", {_times(time)} {said}")
    return phrase + ("" if inference is None else f" and {_times(inference)} the inference time per sample")


def headline(result: dict[str, Any]) -> list[str]:
    """The two questions answered first: for each graph candidate, its sentence against the
    strongest graph-free candidate and its graph sentence."""
    lines = ["## Does a graph model beat the best graph-free model?", ""]
    graphs = [entry for entry in result["candidates"] if entry["uses_graph"] and entry["outcome"] != "control"]
    lines += [f"- {entry['sentence']}" for entry in graphs] + ["", "## Is it your graph?", ""]
    lines += [f"- {entry['graph']['sentence']}" for entry in graphs if "graph" in entry]
    return lines


def write_verdict(result: dict[str, Any], folder: Path) -> str:
    """Write ``verdict.json`` and ``verdict.md`` into ``folder``; return the markdown."""
    from shiftbench.records import write_atomic

    write_atomic(folder / "verdict.json", json.dumps(result, indent=2, default=float) + "\n")
    lines = ["# Verdict", "", *headline(result), ""]
    if result.get("graph_check"):
        check = result["graph_check"]
        lines += ["## Before training: do the signals live on the graph?", "", check["sentence"], "", *check["table"], ""]
        lines += [f"- note: {note}" for note in check["notes"]] + ([""] if check["notes"] else [])
        lines += [f"**{check['agreement']}**", ""] if check.get("agreement") else []
    lines += ["## Every candidate", ""]
    lines += [f"- {entry['sentence']}" for entry in result["candidates"] if not entry["uses_graph"] or entry["outcome"] == "control"]
    # Accuracy goes without saying (the verdicts of classification read as they always have).
    metric = "" if result.get("metric", "accuracy") == "accuracy" else f" test {result['metric']}, {result['better']} is better"
    lines += ["", f"Reference: {result['reference']} (best graph-free candidate on validation). ROPE ±{result['rope']}{metric}, "
              f"alpha {result['alpha']}; {result['units']} paired units ({result['folds']} outer folds x {result['repetitions']} "
              f"repetition{'s' * (result['repetitions'] > 1)}, {result['seeds']} seeds averaged in each); intervals and p from the corrected resampled t-test "
              f"(Nadeau & Bengio 2003), Holm-adjusted over {result['comparisons']} comparisons; probabilities from the "
              "Bayesian correlated t-test (baycomp)."]
    if "protocol" in result:
        lines += ["", f"Protocol: {result['protocol']}"]
    if result.get("notes"):
        lines += ["", "## Notes", "", *(f"- {note}" for note in result["notes"])]
    if result.get("tuning_notes"):
        lines += ["", "## The tuning's budget and luck", "", *(f"- {note}" for note in result["tuning_notes"])]
    markdown = "\n".join(lines) + "\n"
    write_atomic(folder / "verdict.md", markdown)
    return markdown
