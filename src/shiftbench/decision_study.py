"""``shiftbench-decide``: the decision study end to end on one or more datasets: tuning, repeated
paired evaluation, the verdict, its table and plots (see :mod:`decision`)."""

from __future__ import annotations

import io
import time
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from hydra import compose, initialize_config_dir
from omegaconf import DictConfig, OmegaConf

from shiftbench import decision_plots
from shiftbench.batch import BatchRunner, is_launcher_override
from shiftbench.config_store import register_defaults
from shiftbench.data import Dataset
from shiftbench.decision import Candidate, Settings, StudyConfig, read_settings
from shiftbench.decision_protocol import Tuning, expected_best, run_protocol
from shiftbench.errors import ConfigError
from shiftbench.graph_check import GraphCheck, agreement_note, check_graph, summary
from shiftbench.preflight import preflight
from shiftbench.records import write_atomic
from shiftbench.registry import TASKS, Task
from shiftbench.runtime import available_cores
from shiftbench.statistics import rank_test
from shiftbench.tuning_storage import JOURNAL_FILE, keep_tuning, open_storage, settings_digest, study_name
from shiftbench.verdict import usable_units, verdict, write_verdict


def split_arguments(arguments: list[str]) -> tuple[list[str], list[str], list[str]]:
    """The study's own overrides (``decision.*``), the datasets (``data=a,b``: one study each),
    and the overrides every job gets."""
    own = [a for a in arguments if a.startswith("decision.")]
    datasets = [a.split("=", 1)[1] for a in arguments if a.startswith("data=")]
    datasets = datasets[-1].split(",") if datasets else ["sensor_regimes"]
    repeated = sorted({name for name in datasets if datasets.count(name) > 1})
    if repeated:
        raise ConfigError(f"data={','.join(datasets)}: {repeated[0]} is named twice; accepted: distinct datasets "
                          "(the rank test compares datasets)")
    jobs = [a for a in arguments if not a.startswith(("decision.", "data="))]
    return own, datasets, jobs


def run_study(arguments: list[str], config_dir: Path, say=print) -> str:
    """Run the decision study for ``arguments`` and return the verdicts as markdown."""
    own, datasets, common = split_arguments(arguments)
    launcher = [argument for argument in common if is_launcher_override(argument)]
    common = [argument for argument in common if not is_launcher_override(argument)]
    register_defaults()
    task = next((a.split("=", 1)[1] for a in reversed(common) if a.startswith("task=")), "classification")
    per_node = ["arch.readout=node"] if task in TASKS and TASKS[task].head == "nodes" else []
    for dataset in datasets:  # every dataset with the default candidates' families, before any job
        preflight([f"data={dataset}", *common, *launcher, "arch=fc"], config_dir)
        preflight([f"data={dataset}", *common, *launcher, "arch=graph_conv", *per_node], config_dir)
    with initialize_config_dir(str(config_dir.resolve()), version_base="1.3", job_name="shiftbench"):
        def composed(overrides: list[str]) -> DictConfig:
            config = compose("config", overrides=overrides)
            OmegaConf.set_struct(config, False)
            return config

        # The study's settings and search spaces sit beside the Hydra tree, not in it: they are
        # not job configs, and Hydra would offer them as config groups.
        settings = read_settings(config_dir.parent / "decision", own, lambda lines: composed([f"data={datasets[0]}", *common, *lines]))
        for dataset in datasets:
            check_folds(composed([f"data={dataset}", *common, "arch=fc"]), settings)
        results_dir = Path(composed([f"data={datasets[0]}", *common]).results_dir)
        outputs, scores, references = [], {}, {}
        folders = {dataset: results_dir / settings.study.folder / dataset if len(datasets) > 1 else results_dir / settings.study.folder
                   for dataset in datasets}
        storages = {dataset: open_storage(settings.study.storage, folder) for dataset, folder in folders.items()}
        for dataset, folder in folders.items():
            runner = BatchRunner(launcher, folder, say)
            warn_oversubscribed(runner, composed([f"data={dataset}", *common]).threads, say)
            markdown, means, references[dataset] = run_one(dataset, common, settings, folder, composed, runner, storages[dataset], say)
            outputs.append(markdown)
            scores[dataset] = means
    if len(datasets) > 1:
        outputs.append(across_datasets(pd.DataFrame(scores).T, references, settings.candidates, settings.study,
                                       results_dir / settings.study.folder))
    return "\n".join(outputs)


def check_folds(config: DictConfig, settings: Settings) -> None:
    """Refuse, before any job, outer folds the data cannot give."""
    from shiftbench.config import validate
    from shiftbench.data import load_dataset
    from shiftbench.data.splits import check_fold_count

    check_fold_count(load_dataset(validate(config).data), settings.study.splits, key="decision.splits")


def protocol_text(settings: Settings, in_time_order: bool = False) -> str:
    """The protocol in one paragraph, for the verdict and ``verdict.json``; ``in_time_order``:
    the samples are consecutive times, whose folds are forward-chaining."""
    study = settings.study
    if in_time_order:
        folds = (f"{study.splits} forward-chaining outer folds (the samples are times in order: each fold tests a later "
                 f"block and trains only on the times before it; every repetition the same); {study.seeds} seeds per "
                 "fold, averaged into one unit")
    else:
        folds = (f"{study.splits} outer folds (stratified where there are classes) x {study.repetitions} repetition{'s' * (study.repetitions > 1)}, "
                 f"their test parts disjoint within a repetition; {study.seeds} seeds per fold, averaged into one unit")
    if study.protocol == "nested":
        tuning = (f"nested: every trained candidate tuned inside every fold ({study.trials} TPE trials, sampler seed "
                  f"{study.sampler_seed}) on a validation part carved from that fold's training part, so no test part chose anything")
    else:
        tuning = (f"tune_once: every trained candidate tuned in fold 0 only ({study.trials} TPE trials, sampler seed "
                  f"{study.sampler_seed}) and that setting evaluated on every fold: the other folds' test parts hold samples that chose it")
    if study.parallel_trials > 1:
        tuning += (f"; {study.parallel_trials} trials of a tuning drawn at a time (TPE with constant liar: trials in flight "
                   "count among the bad ones, so a batch does not draw one point twice)")
    controls = ("controls tuned on their own equal budget" if study.tune_controls
                else "each control evaluated with its candidate's setting of that fold")
    drawn = "drawn in time order" if in_time_order else "drawn over all samples"
    return f"{tuning}; {folds}; {controls}; the folds are {drawn} (a dataset's own split, if it has one, is not kept)."


def warn_oversubscribed(runner: BatchRunner, threads: int, say) -> None:
    """One line when the parallel jobs' threads ask for more cores than there are."""
    cores = available_cores()
    if runner.workers * threads > cores:
        say(f"warning: hydra.launcher.n_jobs={runner.workers} x threads={threads} is {runner.workers * threads} threads "
            f"on {cores} cores; the jobs will slow each other down")


def run_one(dataset: str, common: list[str], settings: Settings, folder: Path, composed, runner: BatchRunner, storage: Any,
            say) -> tuple[str, dict, str | None]:
    """Tune, evaluate and judge every candidate on one dataset, its jobs handed to ``runner`` a
    batch at a time; write the study's files into ``folder`` and the tunings into ``storage``
    (an Optuna storage, or None). Returns the verdict markdown, the mean test figure per
    candidate (larger is better) and the reference's name."""
    started = time.perf_counter()
    first_job = runner.jobs

    def run(batch: list[list[str]]) -> list[dict[str, Any]]:
        return runner([[f"data={dataset}", *common, *lines] for lines in batch])

    def configured(candidate: Candidate) -> DictConfig:
        return composed([f"data={dataset}", *common, *candidate.overrides])

    study = settings.study
    say(f"decision study on {dataset}: {len(settings.candidates)} candidates (controls included), {study.protocol} protocol, "
        f"{study.trials} trials a tuning, {study.splits} folds x {study.repetitions} repetitions x {study.seeds} seeds; "
        f"jobs through hydra/launcher {runner.name} with {runner.workers} worker{'s' * (runner.workers > 1)}")
    data = loaded(composed([f"data={dataset}", *common, "arch=fc"]))
    warnings = study_warnings(data, settings)
    for line in warnings:
        say(f"warning: {line}")
    check = native_graph_check(data, settings)
    units, tunings = run_protocol(settings, study.sampler_seed, run, say, configured)
    if storage is not None:
        keep_tunings(storage, folder, dataset, tunings, settings, common)
    result = verdict(units, settings.candidates, study, settings.task, settings.uncontrolled)
    if check is not None:
        outcomes = [entry["graph"]["outcome"] for entry in result["candidates"] if "graph" in entry]
        result["graph_check"] = {**summary(check), "agreement": agreement_note(check, outcomes)}
    curves = tuning_curves(tunings, settings)
    notes = [budget_note(curves, settings)] if len(curves) > 1 else []
    notes += tie_notes(tunings, settings)
    if study.tuning_seeds > 1:
        notes += stability_notes(result, settings, run, say, configured)
    metric = settings.task.metric
    result.update(
        data=dataset,
        protocol=protocol_text(settings, data.in_time_order),
        tuning={name: tuning_summary(per_unit, settings.task) for name, per_unit in tunings.items()},
        failed_trials=sum(tuning.failed for per_unit in tunings.values() for tuning in per_unit.values()),
        tuning_notes=notes, notes=warnings,
        launcher=runner.name, workers=runner.workers, parallel_trials=study.parallel_trials,
        tuning_storage=storage_text(study.storage, folder),
        minutes=(time.perf_counter() - started) / 60,
    )
    buffer = io.StringIO()
    units.to_csv(buffer, index=False)
    write_atomic(folder / "units.csv", buffer.getvalue())
    figures = [
        decision_plots.pareto(units, settings.candidates, folder / "pareto.png", result["metric"], result["better"]),
        decision_plots.paired_differences(result, folder / "paired_differences.png"),
    ]
    if curves:
        figures.append(decision_plots.tuning_curves(curves, folder / "tuning_curves.png", metric, result["better"]))
    markdown = write_verdict(result, folder)
    extra = [f"![{figure.stem.replace('_', ' ')}]({figure.name})" for figure in figures]
    write_atomic(folder / "verdict.md", markdown + "\n" + candidates_table(units, settings.task) + "\n" + "\n\n".join(extra) + "\n")
    say(f"{runner.jobs - first_job} jobs (done ones skipped) in {result['minutes']:.1f} min; failed trials: {result['failed_trials']}")
    # Scores for the comparisons across datasets: larger is better.
    sign = 1.0 if settings.task.higher_is_better else -1.0
    means = {name: sign * value for name, value in result[f"mean_test_{metric}"].items() if value is not None}
    return markdown, means, result["reference"]


def keep_tunings(storage: Any, folder: Path, dataset: str, tunings: dict[str, dict[int, Tuning]], settings: Settings,
                 overrides: list[str]) -> None:
    """Every tuning the study ran (controls that reuse their candidate's are not tunings of
    their own) into ``storage``, one stored study each; ``overrides``: every job's."""
    digest = settings_digest(settings.study, settings.spaces, overrides)
    for candidate in settings.candidates:
        for unit, tuning in tunings[candidate.name].items():
            if tuning.study is not None and (not candidate.control_of or settings.study.tune_controls):
                keep_tuning(storage, folder, study_name(dataset, candidate.name, unit, settings.study.sampler_seed, digest), tuning.study)


def storage_text(setting: str, folder: Path) -> str | None:
    """Where the tunings are kept, for ``verdict.json``: the journal's path, or the URL with any
    password hidden."""
    if setting == "none":
        return None
    if setting == "journal":
        return str(folder / JOURNAL_FILE)
    from sqlalchemy.engine import make_url

    return make_url(setting).render_as_string(hide_password=True)


def study_warnings(data: Dataset, settings: Settings) -> list[str]:
    """What the study's settings cannot show on this data, said before any job: fewer units
    than an interval needs, and a ROPE finer than one test sample's share of accuracy (a fold's
    figure moves in steps of ``1 / n_test``, so "equivalent" is then nearly out of reach)."""
    from shiftbench.statistics import FEWEST_UNITS

    study, warnings = settings.study, []
    units = study.splits * study.repetitions
    if units < FEWEST_UNITS:
        warnings.append(f"decision.splits={study.splits} x decision.repetitions={study.repetitions} gives {units} paired units, "
                        f"fewer than the {FEWEST_UNITS} an interval needs: every comparison will be undecided; "
                        f"use decision.splits={FEWEST_UNITS} or more, or decision.repetitions=2")
    if settings.task.metric == "accuracy" and data.labels.ndim == 1:
        tested = data.samples // study.splits
        step = 1.0 / max(tested, 1)
        if study.rope < step:
            warnings.append(f"decision.rope={study.rope:g} is finer than one test sample's share of accuracy "
                            f"(1/{tested} = {step:.4f} with {tested} test samples a fold): equivalence is nearly out of "
                            f"reach; consider decision.rope={step:.3g} or more, or fewer folds (larger test parts)")
    return warnings


def loaded(config: DictConfig) -> Dataset:
    """The dataset a composed job config names, under its own split."""
    from shiftbench.config import validate
    from shiftbench.job import load_data

    return load_data(validate(config))


def native_graph_check(dataset: Dataset, settings: Settings) -> GraphCheck | None:
    """The graph check of the data's native graph, when a candidate reads it (seconds; the
    verdict shows it beside the trained answer)."""
    if not any(candidate.uses_graph for candidate in settings.candidates):
        return None
    return check_graph(dataset, dataset.native_graph, settings.task.name)


def tuning_summary(per_unit: dict[int, Tuning], task: Task) -> dict[str, Any]:
    """What ``verdict.json`` keeps of a candidate's tunings: fold 0's choice and best validation
    figure first (the only ones under ``tune_once``), then every fold's choice and trial figures."""
    first = per_unit[min(per_unit)]
    finite = [value for value in first.values if value is not None]
    best = (max if task.higher_is_better else min)(finite) if finite else None
    return {"chosen": first.chosen, "trials": len(first.values), "failed": sum(t.failed for t in per_unit.values()),
            f"best_val_{task.metric}": best,
            "folds": {str(unit): {"chosen": tuning.chosen, "values": tuning.values, "tied": tuning.tied}
                      for unit, tuning in per_unit.items()}}


def tie_notes(tunings: dict[str, dict[int, Tuning]], settings: Settings) -> list[str]:
    """One line per tuned candidate whose best validation figure was shared by several trials
    in some fold, saying the rule that chose among them."""
    notes = []
    for candidate in settings.candidates:
        if candidate.control_of and not settings.study.tune_controls:
            continue
        tied = {unit: tuning.tied for unit, tuning in tunings[candidate.name].items() if tuning.tied}
        if tied:
            folds = ", ".join(f"fold {unit} ({count + 1} trials)" for unit, count in tied.items())
            notes.append(f"{candidate.name}: trials tied at the best validation {settings.task.metric} in {folds}; the one with "
                         "the fewest parameters, then the earliest, was chosen.")
    return notes


def tuning_curves(tunings: dict[str, dict[int, Tuning]], settings: Settings) -> dict[str, np.ndarray]:
    """Each tuned candidate's expected best validation figure against the number of trials
    (Dodge et al. 2019), averaged over the folds it was tuned in. Controls that share their
    candidate's tuning are left out."""
    curves = {}
    for candidate in settings.candidates:
        per_unit = tunings[candidate.name]
        if (candidate.control_of and not settings.study.tune_controls) or not any(t.values for t in per_unit.values()):
            continue
        curves[candidate.name] = np.nanmean(
            [expected_best(tuning.values, settings.task.higher_is_better) for tuning in per_unit.values()], axis=0)
    return curves


def budget_note(curves: dict[str, np.ndarray], settings: Settings) -> str:
    """Whether the ranking of the tuned candidates by expected best validation figure at the
    full budget already holds at a quarter and at half of it."""
    sign = 1.0 if settings.task.higher_is_better else -1.0
    trials = settings.study.trials

    def ranking(count: int) -> list[str]:
        return sorted(curves, key=lambda name: -sign * curves[name][count - 1])

    full = ranking(trials)
    parts = []
    for share, count in (("a quarter", max(1, trials // 4)), ("half", max(1, trials // 2))):
        held = ranking(count) == full
        parts.append(f"{'holds' if held else 'does not hold'} at {share} of it ({count} trials"
                     f"{'' if held else ': ' + ', '.join(ranking(count))})")
    return (f"The ranking of the tuned candidates by expected best validation {settings.task.metric} at the full budget "
            f"of {trials} trials ({', '.join(full)}; Dodge et al. 2019's estimator from the trials run) "
            f"{parts[0]} and {parts[1]}.")


def stability_notes(result: dict[str, Any], settings: Settings, run, say, configured) -> list[str]:
    """With ``tuning_seeds`` > 1: the whole protocol again under each further sampler seed, and
    how often each candidate's outcomes (against the reference, and its graph against its
    control) are the same as under the first."""
    study = settings.study
    outcomes = [outcomes_of(result)]
    for extra in range(1, study.tuning_seeds):
        say(f"tuning seed {extra + 1}/{study.tuning_seeds}")
        units, _ = run_protocol(settings, study.sampler_seed + extra, run, say, configured)
        outcomes.append(outcomes_of(verdict(units, settings.candidates, study, settings.task, settings.uncontrolled)))
    notes = []
    for key, first in outcomes[0].items():
        same = sum(other.get(key) == first for other in outcomes)
        name, question = key
        said = first.replace("_", " ")
        what = f"its graph against the rewired control: {said}" if question == "graph" else f"{said}"
        notes.append(f"{name}: {what} with {same} of {study.tuning_seeds} tuning seeds.")
    return notes


def outcomes_of(result: dict[str, Any]) -> dict[tuple[str, str], str]:
    """Every decided question of a verdict: ``(candidate, "reference" | "graph") -> outcome``."""
    found = {}
    for entry in result["candidates"]:
        if "comparison" in entry:
            found[(entry["candidate"], "reference")] = entry["outcome"]
        if "comparison" in entry.get("graph", {}):
            found[(entry["candidate"], "graph")] = entry["graph"]["outcome"]
    return found


def candidates_table(units: pd.DataFrame, task: Task) -> str:
    """Mean figures per candidate over its usable runs (fold x seed), wall and CPU seconds of
    training, and the median parameter count (nested tuning may choose another size in each
    fold), as markdown."""
    completed = usable_units(units, task)
    metric = task.metric
    test, val = f"test_{metric}", f"val_{metric}"
    table = completed.groupby("candidate", sort=False).agg(
        test=(test, "mean"), std=(test, "std"), val=(val, "mean"),
        parameters=("parameters", "median"), train_seconds=("train_seconds", "mean"),
        train_cpu_seconds=("train_cpu_seconds", "mean"), runs=(test, "size"),
    )
    short = "acc" if metric == "accuracy" else metric
    lines = [f"| candidate | test {short} | ± std | val {short} | median parameters | train s | train CPU s | runs |",
             "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |"]
    for name, row in table.iterrows():
        cpu = "-" if pd.isna(row.train_cpu_seconds) else f"{row.train_cpu_seconds:.2f}"
        lines.append(
            f"| {name} | {row.test:.3f} | {row['std']:.3f} | {row.val:.3f} | {row.parameters:,.0f} | "
            f"{row.train_seconds:.2f} | {cpu} | {int(row.runs)} |"
        )
    return "\n".join(lines) + "\n"


def across_datasets(scores: pd.DataFrame, references: dict[str, str | None], candidates: list[Candidate], study: StudyConfig,
                    folder: Path) -> str:
    """Across datasets: Friedman and Nemenyi over all candidates, with a critical-difference
    diagram, and for each graph candidate the Bayesian signed-rank test against each dataset's
    reference and against its control. ``scores``: one row per dataset, one column per
    candidate, larger is better; ``references``: each dataset's strongest graph-free candidate."""
    lines = [f"# Across {len(scores)} datasets", ""]
    complete = scores.dropna(axis=1)
    missing = [name for name in scores.columns if name not in complete.columns]
    if missing:
        lines += [f"Left out of the rank test, with no figure on every dataset: {', '.join(missing)}.", ""]
    if complete.shape[1] < 3:
        lines.append("Fewer than 3 candidates with a figure on every dataset: no rank test.")
    else:
        test = rank_test(complete, study.alpha)
        figure = decision_plots.critical_difference(test, folder / "critical_difference.png")
        ranks = ", ".join(f"{name} {rank:.2f}" for name, rank in test.ranks.sort_values().items())
        lines += [f"Average ranks (1 is best): {ranks}. Friedman p = {test.friedman_p:.3g}; "
                  f"Nemenyi critical difference {test.critical_difference:.2f} at alpha {study.alpha}.", "",
                  f"![critical difference]({figure.name})"]
    pairs = bayesian_pairs(scores, references, candidates, study.rope)
    if pairs:
        lines += ["", f"Bayesian signed-rank test over datasets (Benavoli et al. 2017, baycomp), ROPE ±{study.rope:g}:", "", *pairs]
    markdown = "\n".join(lines) + "\n"
    write_atomic(folder / "across_datasets.md", markdown)
    return markdown


def bayesian_pairs(scores: pd.DataFrame, references: dict[str, str | None], candidates: list[Candidate], rope: float) -> list[str]:
    """One line per graph candidate and question (against each dataset's reference, against its
    control), over the datasets where both figures exist; a pair with fewer than 2 is left out."""
    from shiftbench.statistics import over_datasets

    controls = {candidate.control_of: candidate.name for candidate in candidates if candidate.control_of}
    lines = []
    for candidate in candidates:
        if not candidate.uses_graph or candidate.control_of or candidate.name not in scores:
            continue
        reference = pd.Series({dataset: scores.at[dataset, name] if name in scores else np.nan for dataset, name in references.items()})
        against = [("each dataset's strongest graph-free candidate", reference)]
        if controls.get(candidate.name) in scores:
            against.append(("its degree-preserving rewiring", scores[controls[candidate.name]]))
        for label, other in against:
            both = scores[candidate.name].notna() & other.notna()
            if both.sum() < 2:
                continue
            better, equivalent, worse = over_datasets(scores[candidate.name][both].to_numpy(), other[both].to_numpy(), rope)
            lines.append(f"- {candidate.name} against {label}: probability {better:.2f} better by more than the ROPE, "
                         f"{equivalent:.2f} equivalent, {worse:.2f} worse ({int(both.sum())} datasets).")
    return lines
