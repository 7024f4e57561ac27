"""The decision study end to end on small budgets: refusals before any job, tuning that never
reads the test split, and verdicts on planted data."""

import json
from pathlib import Path

import numpy as np
import pytest

from shiftbench.cli import CONFIG_DIR
from shiftbench.decision_study import run_study
from shiftbench.errors import ConfigError

SMALL = ["train.epochs=15", "train.patience=5", "decision.splits=2", "decision.seeds=1", "decision.trials=3"]
FC_VS_QDA = "decision.candidates=[{name: fc, overrides: [arch=fc]}, {name: qda, overrides: [arch=qda]}]"


@pytest.mark.parametrize(("setting", "message"), [
    ("decision.trials=0", "decision.trials=0 is not accepted; accepted: an integer >= 1"),
    ("decision.splits=-1", "decision.splits=-1 is not accepted; accepted: an integer >= 2"),
    ("decision.splits=201", "decision.splits=201 is not accepted: the smallest class has 200 samples; accepted: an integer from 2 to 200"),
    ("decision.protocol=twice", "decision.protocol='twice' is not accepted; accepted: one of nested, tune_once"),
    ("decision.tuning_seeds=0", "decision.tuning_seeds=0 is not accepted; accepted: an integer >= 1"),
    ("decision.rope=nan", "decision.rope=nan is not accepted"),
    ("decision.alpha=high", "decision.alpha='high' has the wrong type; accepted: a number"),
    ("decision.sampler_seed=x", "decision.sampler_seed='x' has the wrong type; accepted: an integer"),
    ("decision.sampler_seed=-1", "decision.sampler_seed=-1 is not accepted; accepted: an integer >= 0"),
    ("decision.folder=../elsewhere", "decision.folder='../elsewhere' is not accepted"),
    ("decision.folder=/tmp/elsewhere", "decision.folder='/tmp/elsewhere' is not accepted; accepted: a folder name under results_dir"),
    ("decision.budget=3", "accepted keys: decision.candidates"),
    ("data=digits,digits", "data=digits,digits: digits is named twice; accepted: distinct datasets"),
    ("decision.only=fc,gnn", "decision.only=fc,gnn: gnn names no candidate; accepted: candidate names or families among fc, "),
    ("decision.rope=2", "decision.rope=2.0 is not accepted; accepted: a number in [0, 1"),
    ("decision.candidates=[{name: g, overrides: [arch=graph_conv]}]", "at least one graph-free candidate"),
    ("decision.candidates=[{name: q, overrides: [arch=qda]}, {name: g, overrides: [arch=gnn]}]", "candidate 'g': "),
    ("decision.candidates=[{name: q, overrides: [arch=qda]}, {name: g, overrides: [arch.order=-2]}]",
     "candidate 'g': arch.order=-2 is not accepted; accepted: an integer >= 0"),
])
def test_bad_settings_are_refused_in_one_line_before_any_job(tmp_path, setting, message):
    with pytest.raises(ConfigError, match=message.replace("[", r"\[")):
        run_study([f"results_dir={tmp_path}", setting], CONFIG_DIR)
    assert not (tmp_path / "store").exists()


def planted_file(path: Path, poisoned: np.ndarray | None = None) -> Path:
    """Signals whose class shifts the mean of the first nodes. ``poisoned``: samples whose
    signals are replaced by large noise (the classes' counts, and so the folds, stay the same)."""
    rng = np.random.default_rng(0)
    labels = np.repeat([0, 1, 2], 40)
    signals = rng.standard_normal((120, 12)) + labels[:, None] * (np.arange(12) < 4)
    if poisoned is not None:
        signals[poisoned] = rng.standard_normal((len(poisoned), 12)) * 50
    np.savez(path, signals=signals.astype(np.float32), labels=labels)
    return path


def test_tuning_never_reads_the_test_part_of_its_fold(tmp_path):
    # Poison the signals of fold 0's test part: fold 0's tuning must see exactly the same figures.
    from shiftbench.data.files import load_signal_file
    from shiftbench.data.splits import fold_split

    clean = planted_file(tmp_path / "clean.npz")
    test_part = fold_split(load_signal_file(clean), 2, 0).splits.test
    tunings = []
    for name, data in (("clean", clean), ("poisoned", planted_file(tmp_path / "poisoned.npz", test_part))):
        folder = tmp_path / f"run_{name}"
        run_study([f"results_dir={folder}", "data=file", f"data.path={data}", *SMALL, "decision.protocol=tune_once", FC_VS_QDA],
                  CONFIG_DIR, say=lambda line: None)
        tuning = json.loads((folder / "decision" / "verdict.json").read_text())["tuning"]["fc"]
        tunings.append((tuning["chosen"], tuning["folds"]["0"]["values"]))
    assert tunings[0] == tunings[1]


def test_a_badly_configured_family_is_judged_by_its_tuned_figure(tmp_path):
    # fc's configured learning rate is far off (10); the tuner searches train.lr, and the verdict
    # reads the evaluation of the tuned setting, not the default's.
    data = planted_file(tmp_path / "data.npz")
    arguments = [f"results_dir={tmp_path}", "data=file", f"data.path={data}", "train.lr=10", *SMALL, FC_VS_QDA]
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    result = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    (lr,) = [line for line in result["tuning"]["fc"]["chosen"] if line.startswith("train.lr=")]
    assert float(lr.split("=")[1]) < 0.05
    # Chance is 1/3 and lr=10 diverges or sits near it; on 60 test samples a fold the tuned setting
    # (ties on validation go to the smaller network) lands between 0.5 and 0.65.
    assert result["mean_test_accuracy"]["fc"] > 0.45

    # Run again, the study trains nothing and says the same.
    records = {path: path.stat().st_mtime_ns for path in (tmp_path / "store").rglob("record.json")}
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    assert {path: path.stat().st_mtime_ns for path in (tmp_path / "store").rglob("record.json")} == records
    assert json.loads((tmp_path / "decision" / "verdict.json").read_text())["candidates"] == result["candidates"]


def test_a_graph_that_carries_no_information_is_not_said_to_earn_its_keep(tmp_path):
    # The classes shift the mean of a few nodes, independently of any graph; graph_conv runs on a
    # random SBM graph. The best graph-free model (logistic regression is the right model here)
    # must not be beaten.
    data = planted_file(tmp_path / "data.npz")
    candidates = ("decision.candidates=[{name: random graph, overrides: [arch=graph_conv, graph=sbm, graph.blocks=2]}, "
                  "{name: logistic, overrides: [arch=logistic]}, {name: qda, overrides: [arch=qda]}]")
    run_study([f"results_dir={tmp_path}", "data=file", f"data.path={data}", *SMALL, "decision.splits=3", candidates],
              CONFIG_DIR, say=lambda line: None)
    result = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    (graph,) = [entry for entry in result["candidates"] if entry["candidate"] == "random graph"]
    assert graph["outcome"] != "earns_its_keep"
    assert result["reference"] in ("logistic", "qda")


def test_a_node_task_gives_every_convolution_the_per_node_map_and_never_searches_pooling(tmp_path):
    from hydra import compose, initialize_config_dir
    from omegaconf import OmegaConf

    from shiftbench.config_store import register_defaults
    from shiftbench.decision import read_settings

    register_defaults()
    with initialize_config_dir(str(CONFIG_DIR.resolve()), version_base="1.3", job_name="shiftbench"):
        def composed(lines):
            config = compose("config", overrides=["task=node_regression", "data=sensor_forecast", *lines])
            OmegaConf.set_struct(config, False)
            return config

        settings = read_settings(CONFIG_DIR.parent / "decision", [], composed)
    names = {candidate.name: candidate for candidate in settings.candidates}
    # The classifiers and ridge left out; the graph candidate keeps its rewired control.
    assert set(names) == {"fc", "line_conv", "graph_conv on native graph", "graph_conv on native graph, rewired", "nearest"}
    assert "arch.readout=node" in names["line_conv"].overrides and "arch.readout=node" not in names["fc"].overrides
    assert "arch.readout=node" in names["graph_conv on native graph, rewired"].overrides
    assert all(dimension.key != "arch.readout" for dimension in settings.spaces["graph_conv"])
    assert settings.task.name == "node_regression"


def test_a_floor_that_fails_every_unit_is_named_and_left_out_not_a_traceback(tmp_path):
    # More nodes (32 features) than samples per class in a training part (24): QDA's covariance
    # is singular on every unit (scikit-learn refuses it). The verdict must still be reached.
    arguments = [f"results_dir={tmp_path}", "data.nodes=32", "data.samples_per_class=40", "train.epochs=4",
                 "decision.trials=2", "decision.splits=2", "decision.seeds=1",
                 "decision.candidates=[{name: fc, overrides: [arch=fc]}, {name: nearest, overrides: [arch=nearest]}, "
                 "{name: qda, overrides: [arch=qda]}]"]
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    result = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    (qda,) = [entry for entry in result["candidates"] if entry["candidate"] == "qda"]
    assert qda["outcome"] == "missing_units" and "left out" in qda["sentence"] and "not full rank" in qda["sentence"]
    assert result["reference"] == "nearest"


def test_a_search_space_choice_its_schema_refuses_stops_the_study_before_any_job(tmp_path):
    import shutil

    root = Path(CONFIG_DIR).parent
    shutil.copytree(root / "configs", tmp_path / "configs")
    shutil.copytree(root / "decision", tmp_path / "decision")
    space = tmp_path / "decision" / "search" / "fc.yaml"
    space.write_text(space.read_text().replace("arch.hidden: {choices: [[32], [64], [128], [64, 64]]}",
                                               "arch.hidden: {choices: [[64], [0]]}"))
    with pytest.raises(ConfigError, match=r"search space fc.yaml: arch.hidden=\[0\] is not accepted; accepted: a list of integers >= 1"):
        run_study([f"results_dir={tmp_path / 'results'}", FC_VS_QDA], tmp_path / "configs")
    assert not (tmp_path / "results" / "store").exists()


def test_a_node_task_on_real_regional_data_runs_end_to_end_with_the_graph_check_on_top(tmp_path):
    # Real data with its real graph (libpysal's US states' incomes and contiguity); a node task's
    # candidates need the per-node readout in every check made before the jobs.
    markdown = run_study([f"results_dir={tmp_path}", "data=state_incomes", "task=node_regression", "decision.trials=1",
                          "decision.splits=2", "decision.seeds=1", "train.epochs=3"], CONFIG_DIR, say=lambda line: None)
    assert "## Before training: do the signals live on the graph?" in markdown
    written = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    assert written["metric"] == "rmse" and written["graph_check"]["figures"]["nodes"] == 48


def test_several_datasets_end_with_the_rank_test_and_the_graph_candidates_signed_rank_probabilities(tmp_path):
    # Friedman/Nemenyi (scikit-posthocs) and baycomp's signed-rank test over the datasets, each
    # dataset's own reference taken from its own verdict.
    run_study([f"results_dir={tmp_path}", "data=sensor_regimes,digits", "decision.trials=1", "decision.splits=3",
               "decision.seeds=1", "train.epochs=1",
               "decision.candidates=[{name: fc, overrides: [arch=fc]}, {name: gnn, overrides: [arch=graph_conv]}, "
               "{name: nearest, overrides: [arch=nearest]}]"], CONFIG_DIR, say=lambda line: None)
    markdown = (tmp_path / "decision" / "across_datasets.md").read_text()
    assert "Average ranks (1 is best):" in markdown and (tmp_path / "decision" / "critical_difference.png").exists()
    assert "- gnn against each dataset's strongest graph-free candidate: probability" in markdown
    assert "- gnn against its degree-preserving rewiring: probability" in markdown
    assert all((tmp_path / "decision" / name / "verdict.json").exists() for name in ("sensor_regimes", "digits"))


def stored_trials(journal: Path) -> dict[str, list[float | None]]:
    import optuna
    from optuna.storages.journal import JournalFileBackend

    storage = optuna.storages.JournalStorage(JournalFileBackend(str(journal)))
    return {summary.study_name: [trial.value for trial in optuna.load_study(study_name=summary.study_name, storage=storage).trials]
            for summary in optuna.get_all_study_summaries(storage)}


def test_the_tunings_are_kept_in_optunas_journal_and_a_rerun_rewrites_them_instead_of_adding(tmp_path):
    # Optuna's JournalStorage read back with Optuna's own API holds each fold's trials, the
    # figures verdict.json reports; a rerun (everything skipped) leaves the same trials.
    arguments = [f"results_dir={tmp_path}", *SMALL, "train.epochs=2", FC_VS_QDA]
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    journal = tmp_path / "decision" / "tuning.journal"
    first = stored_trials(journal)
    result = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    assert sorted(first) == [name for name in sorted(first) if name.startswith("sensor_regimes | fc | fold ")] and len(first) == 2
    assert result["tuning_storage"] == str(journal)
    fold_zero = next(values for name, values in first.items() if "fold 0" in name)
    assert fold_zero == result["tuning"]["fc"]["folds"]["0"]["values"]
    run_study(arguments, CONFIG_DIR, say=lambda line: None)
    assert stored_trials(journal) == first


def test_parallel_trials_draw_distinct_settings_in_a_batch_and_a_rerun_chooses_the_same(tmp_path):
    # Optuna's constant liar: two trials asked before either is told do not repeat a point.
    arguments = [f"results_dir={tmp_path}", *SMALL, "train.epochs=2", "decision.trials=4", "decision.parallel_trials=2",
                 "decision.storage=none", FC_VS_QDA]
    lines: list[str] = []
    run_study(arguments, CONFIG_DIR, say=lines.append)
    drawn = [line.split("  ", 2)[-1] for line in lines if line.startswith("  fold 0 trial")]
    assert len(drawn) == 4 and len(set(drawn)) == 4
    first = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    again: list[str] = []
    run_study(arguments, CONFIG_DIR, say=again.append)
    second = json.loads((tmp_path / "decision" / "verdict.json").read_text())
    assert second["tuning"] == first["tuning"] and "parallel_trials=2" not in json.dumps(first["protocol"])
    assert "2 trials of a tuning drawn at a time" in first["protocol"] and first["tuning_storage"] is None
    assert any("0 jobs" in line or "jobs (done ones skipped)" in line for line in again)


@pytest.mark.parametrize(("setting", "message"), [
    ("decision.storage=nowhere", "decision.storage='nowhere' is not accepted; accepted: journal"),
    ("decision.storage=nosuchdb://x", "decision.storage=nosuchdb://x: cannot be opened"),
    ("decision.parallel_trials=0", "decision.parallel_trials=0 is not accepted; accepted: an integer >= 1"),
])
def test_a_storage_that_cannot_be_opened_is_refused_in_one_line_before_any_job(tmp_path, setting, message):
    with pytest.raises(ConfigError, match=message.replace("[", r"\[")) as refused:
        run_study([f"results_dir={tmp_path}", setting, FC_VS_QDA], CONFIG_DIR)
    assert "\n" not in str(refused.value) and not (tmp_path / "store").exists()


def test_decision_only_keeps_the_candidates_named_by_name_or_family_in_the_settings_order():
    from omegaconf import OmegaConf

    from shiftbench.decision import chosen_entries

    entries = OmegaConf.load(CONFIG_DIR.parent / "decision" / "settings.yaml").candidates
    kept = chosen_entries(entries, "qda, graph_conv,fc")
    assert [entry.name for entry in kept] == ["fc", "graph_conv on native graph", "qda"]
    assert len(chosen_entries(entries, "")) == len(entries)
