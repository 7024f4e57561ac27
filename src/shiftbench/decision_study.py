"""``shiftbench-decide``: the decision study end to end on one or more datasets: tuning, repeated
paired evaluation, the verdict, its table and plots (see :mod:`decision`)."""

from __future__ import annotations

import io
import time
from pathlib import Path
from typing import Any

import pandas as pd
from hydra import compose, initialize_config_dir
from omegaconf import DictConfig, OmegaConf

from shiftbench import decision_plots
from shiftbench.config_store import register_defaults
from shiftbench.decision import Settings, evaluate, read_settings, tune, usable_units, verdict, write_verdict
from shiftbench.job import run_job
from shiftbench.preflight import preflight
from shiftbench.records import write_atomic
from shiftbench.registry import TASKS, Task
from shiftbench.statistics import rank_test


def split_arguments(arguments: list[str]) -> tuple[list[str], list[str], list[str]]:
    """The study's own overrides (``decision.*``), the datasets (``data=a,b``: one study each),
    and the overrides every job gets."""
    own = [a for a in arguments if a.startswith("decision.")]
    datasets = [a.split("=", 1)[1] for a in arguments if a.startswith("data=")]
    datasets = datasets[-1].split(",") if datasets else ["sensor_regimes"]
    jobs = [a for a in arguments if not a.startswith(("decision.", "data="))]
    return own, datasets, jobs


def run_study(arguments: list[str], config_dir: Path, say=print) -> str:
    """Run the decision study for ``arguments`` and return the verdicts as markdown."""
    own, datasets, common = split_arguments(arguments)
    register_defaults()
    task = next((a.split("=", 1)[1] for a in reversed(common) if a.startswith("task=")), "classification")
    per_node = ["arch.readout=node"] if task in TASKS and TASKS[task].head == "nodes" else []
    for dataset in datasets:  # every dataset with the default candidates' families, before any job
        preflight([f"data={dataset}", *common, "arch=fc"], config_dir)
        preflight([f"data={dataset}", *common, "arch=graph_conv", *per_node], config_dir)
    with initialize_config_dir(str(config_dir.resolve()), version_base="1.3", job_name="shiftbench"):
        def composed(overrides: list[str]) -> DictConfig:
            config = compose("config", overrides=overrides)
            OmegaConf.set_struct(config, False)
            return config

        # The study's settings and search spaces sit beside the Hydra tree, not in it: they are
        # not job configs, and Hydra would offer them as config groups.
        settings = read_settings(config_dir.parent / "decision", own, lambda lines: composed([f"data={datasets[0]}", *common, *lines]))
        results_dir = Path(composed([f"data={datasets[0]}", *common]).results_dir)
        outputs, scores = [], {}
        for dataset in datasets:
            folder = results_dir / settings.folder / dataset if len(datasets) > 1 else results_dir / settings.folder
            markdown, means = run_one(dataset, common, settings, folder, composed, say)
            outputs.append(markdown)
            scores[dataset] = means
    if len(datasets) > 1:
        outputs.append(across_datasets(pd.DataFrame(scores).T, results_dir / settings.folder, settings.alpha))
    return "\n".join(outputs)


def run_one(dataset: str, common: list[str], settings: Settings, folder: Path, composed, say) -> tuple[str, dict]:
    """Tune, evaluate and judge every candidate on one dataset; write the study's files into
    ``folder``. Returns the verdict markdown and the mean test accuracy per candidate."""
    started = time.perf_counter()
    counts = {"jobs": 0}

    def run(lines: list[str]) -> dict[str, Any]:
        overrides = [f"data={dataset}", *common, *lines]
        counts["jobs"] += 1
        return run_job(composed(overrides), folder, overrides, live=False, quiet=True)

    say(f"decision study on {dataset}: {len(settings.candidates)} candidates, {settings.trials} trials each, "
        f"{settings.splits} splits x {settings.seeds} seeds")
    tables, tuning = [], {}
    for candidate in settings.candidates:
        say(f"tuning {candidate.name}")
        configured = composed([f"data={dataset}", *common, *candidate.overrides])
        chosen, summary = tune(candidate, settings, run, say, configured)
        tuning[candidate.name] = {**summary, "chosen": chosen}
        say(f"evaluating {candidate.name} ({' '.join(chosen) or 'as configured'})")
        tables.append(evaluate(candidate, chosen, settings, run))
    units = pd.concat(tables, ignore_index=True)
    result = verdict(units, settings.candidates, settings.rope, settings.alpha, settings.task)
    result.update(
        data=dataset,
        protocol="tuned once on the validation split of split 0 (seed 0); evaluated on splits 0.."
                 f"{settings.splits - 1} x seeds 0..{settings.seeds - 1}; test figures never chose anything",
        tuning=tuning,
        failed_trials=sum(t["failed"] for t in tuning.values()),
        minutes=(time.perf_counter() - started) / 60,
    )
    buffer = io.StringIO()
    units.to_csv(buffer, index=False)
    write_atomic(folder / "units.csv", buffer.getvalue())
    figures = [
        decision_plots.pareto(units, settings.candidates, folder / "pareto.png", result["metric"], result["better"]),
        decision_plots.paired_differences(result, folder / "paired_differences.png"),
    ]
    markdown = write_verdict(result, folder)
    extra = [f"![{figure.stem.replace('_', ' ')}]({figure.name})" for figure in figures]
    write_atomic(folder / "verdict.md", markdown + "\n" + candidates_table(units, settings.task) + "\n" + "\n\n".join(extra) + "\n")
    say(f"{counts['jobs']} jobs (done ones skipped) in {result['minutes']:.1f} min; failed trials: {result['failed_trials']}")
    # Scores for the rank test across datasets: larger is better.
    sign = 1.0 if settings.task.higher_is_better else -1.0
    return markdown, {name: sign * value for name, value in result[f"mean_test_{settings.task.metric}"].items() if value is not None}


def candidates_table(units: pd.DataFrame, task: Task) -> str:
    """Mean figures per candidate over its usable units, as markdown."""
    completed = usable_units(units, task)
    metric = task.metric
    test, val = f"test_{metric}", f"val_{metric}"
    table = completed.groupby("candidate", sort=False).agg(
        test=(test, "mean"), std=(test, "std"), val=(val, "mean"),
        parameters=("parameters", "median"), train_seconds=("train_seconds", "mean"), units=(test, "size"),
    )
    short = "acc" if metric == "accuracy" else metric
    lines = [f"| candidate | test {short} | ± std | val {short} | parameters | train s | units |",
             "| --- | ---: | ---: | ---: | ---: | ---: | ---: |"]
    for name, row in table.iterrows():
        lines.append(
            f"| {name} | {row.test:.3f} | {row['std']:.3f} | {row.val:.3f} | {row.parameters:,.0f} | "
            f"{row.train_seconds:.2f} | {int(row.units)} |"
        )
    return "\n".join(lines) + "\n"


def across_datasets(scores: pd.DataFrame, folder: Path, alpha: float) -> str:
    """Friedman and Nemenyi over datasets, with a critical-difference diagram."""
    if scores.shape[1] < 3:
        return "Across datasets: fewer than 3 candidates, no rank test.\n"
    test = rank_test(scores, alpha)
    figure = decision_plots.critical_difference(test, folder / "critical_difference.png")
    ranks = ", ".join(f"{name} {rank:.2f}" for name, rank in test.ranks.sort_values().items())
    markdown = (
        f"# Across {len(scores)} datasets\n\nAverage ranks (1 is best): {ranks}. Friedman p = {test.friedman_p:.3g}; "
        f"Nemenyi critical difference {test.critical_difference:.2f} at alpha {alpha}.\n\n![critical difference]({figure.name})\n"
    )
    write_atomic(folder / "across_datasets.md", markdown)
    return markdown
