"""The verdict's rules on planted paired results over outer folds, and the study's refusals of
bad search spaces."""

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from shiftbench.decision import Candidate, StudyConfig, read_space
from shiftbench.registry import TASKS
from shiftbench.errors import ConfigError
from shiftbench.statistics import compare_paired
from shiftbench.verdict import decide, verdict

GNN = Candidate("graph_conv", ("arch=graph_conv",), "graph_conv", True)
CONTROL = Candidate("graph_conv, rewired", ("arch=graph_conv", "graph=rewired"), "graph_conv", True, control_of="graph_conv")
FC = Candidate("fc", ("arch=fc",), "fc", False)
QDA = Candidate("qda", ("arch=qda",), "qda", False)
TEN_FOLDS = StudyConfig(splits=10, seeds=1)
CLASSIFICATION = TASKS["classification"]


def units(accuracy: dict[str, list[float]], val: dict[str, float] | None = None, seeds: int = 1) -> pd.DataFrame:
    """Planted records: one row per candidate, fold and seed (every seed of a fold the same figure)."""
    rows = []
    for name, figures in accuracy.items():
        for fold, figure in enumerate(figures):
            for seed in range(seeds):
                rows.append({"candidate": name, "split": fold, "seed": seed, "status": "completed", "error": None,
                             "test_accuracy": figure, "val_accuracy": (val or {}).get(name, figure),
                             "parameters": 1000 if name != "qda" else 0, "train_seconds": 2.0,
                             "inference_seconds_per_sample": 1e-5})
    return pd.DataFrame(rows)


def entry(result, name):
    return next(e for e in result["candidates"] if e["candidate"] == name)


def noisy(mean: float, spread: float, seed: int = 0, count: int = 10) -> np.ndarray:
    return mean + np.random.default_rng(seed).normal(0, spread, count)


def test_a_graph_model_clearly_ahead_of_the_best_floor_earns_its_keep():
    base = noisy(0.90, 0.02)
    result = verdict(units({"graph_conv": base + noisy(0.06, 0.01, 1), "fc": base - noisy(0.15, 0.01, 2), "qda": base},
                           {"fc": 0.7, "qda": 0.93, "graph_conv": 0.97}), [GNN, FC, QDA], TEN_FOLDS, CLASSIFICATION)
    assert result["reference"] == "qda"  # the best graph-free candidate, not fc
    assert entry(result, "graph_conv")["outcome"] == "earns_its_keep"
    assert entry(result, "graph_conv")["sentence"].startswith("graph_conv earns its keep over qda: +0.0")
    assert "corrected for resampling, 10 folds x 1 repetition" in entry(result, "graph_conv")["sentence"]
    assert "probability 1.00 better by more than 0.01" in entry(result, "graph_conv")["sentence"]
    assert entry(result, "fc")["outcome"] == "does_not_earn_its_keep"


def test_a_graph_model_level_with_the_floor_is_equivalent_within_the_rope():
    base = np.linspace(0.80, 0.90, 10)
    result = verdict(units({"graph_conv": base + 0.001 * (-1) ** np.arange(10), "qda": base}), [GNN, QDA], TEN_FOLDS, CLASSIFICATION)
    assert entry(result, "graph_conv")["outcome"] == "equivalent"
    assert "is equivalent within the ROPE to qda" in entry(result, "graph_conv")["sentence"]


def test_a_graph_model_behind_the_floor_does_not_earn_its_keep():
    base = noisy(0.9, 0.01, 1)
    result = verdict(units({"graph_conv": base - 0.05 + noisy(0, 0.01, 2), "qda": base}), [GNN, QDA], TEN_FOLDS, CLASSIFICATION)
    assert entry(result, "graph_conv")["outcome"] == "does_not_earn_its_keep"


def test_a_wide_interval_is_undecided_and_says_how_many_units_would_decide_it():
    result = verdict(units({"graph_conv": [0.88, 0.83, 0.86, 0.82, 0.86], "qda": [0.8] * 5}), [GNN, QDA],
                     StudyConfig(splits=5, seeds=1), CLASSIFICATION)
    said = entry(result, "graph_conv")
    assert said["outcome"] == "undecided"
    assert "the interval crosses the ROPE's edge; about" in said["sentence"] and "repetitions of 5 folds) would decide it" in said["sentence"]


def test_an_interval_above_the_rope_with_a_large_holm_p_says_the_p_value_falls_short():
    comparison = compare_paired(noisy(0.9, 0.01, 3) + 0.05, noisy(0.9, 0.01, 4), rope=0.01, folds=10)
    from shiftbench.verdict import undecided_reason

    assert decide(comparison, holm_p=0.2, rope=0.01, alpha=0.05) == "undecided"
    assert undecided_reason(comparison, 0.2, TEN_FOLDS).startswith("the interval clears the ROPE but Holm p = 0.2")


@pytest.mark.parametrize("figures", [[0.9, 0.91], [0.85, 0.86, 0.87, 0.88]])
def test_too_few_or_identical_units_are_undecided_never_p_zero(figures):
    # Two folds, or every fold exactly 0.05 ahead: no spread to test against.
    result = verdict(units({"graph_conv": figures, "qda": [f - 0.05 for f in figures]}), [GNN, QDA],
                     StudyConfig(splits=max(len(figures), 2), seeds=1), CLASSIFICATION)
    said = entry(result, "graph_conv")
    assert said["outcome"] == "undecided" and "too few or identical units" in said["sentence"]
    assert np.isnan(said["comparison"]["p"])


def test_a_duplicated_seed_does_not_narrow_the_interval():
    # Seeds are averaged within a fold: two identical seeds are one observation, not two.
    figures = {"graph_conv": noisy(0.9, 0.02, 4), "qda": noisy(0.88, 0.02, 5)}
    one = verdict(units(figures, seeds=1), [GNN, QDA], StudyConfig(splits=10, seeds=1), CLASSIFICATION)
    two = verdict(units(figures, seeds=2), [GNN, QDA], StudyConfig(splits=10, seeds=2), CLASSIFICATION)
    first, second = entry(one, "graph_conv")["comparison"], entry(two, "graph_conv")["comparison"]
    assert (second["low"], second["high"]) == pytest.approx((first["low"], first["high"]))
    assert len(second["differences"]) == 10


def test_unpaired_units_are_named_instead_of_compared():
    planted = units({"graph_conv": [0.9, 0.91, 0.92, 0.93], "qda": [0.8, 0.81, 0.82, 0.83]})
    planted.loc[(planted["candidate"] == "graph_conv") & (planted["split"] == 1), ["status", "error"]] = ["failed", "Boom: out of luck"]
    result = verdict(planted, [GNN, QDA], StudyConfig(splits=4, seeds=1), CLASSIFICATION)
    assert entry(result, "graph_conv")["outcome"] == "missing_units"
    assert "no usable run for folds 1 (first error: Boom: out of luck)" in entry(result, "graph_conv")["sentence"]


@pytest.mark.parametrize(("column", "value"), [("val_accuracy", float("inf")), ("test_accuracy", float("nan")), ("test_accuracy", None)])
def test_a_non_finite_or_missing_figure_is_a_failed_unit(column, value):
    planted = units({"graph_conv": [0.9, 0.91, 0.92, 0.93], "qda": [0.8, 0.81, 0.82, 0.83]})
    planted[column] = planted[column].astype(object)
    planted.loc[(planted["candidate"] == "graph_conv") & (planted["split"] == 2), column] = value
    result = verdict(planted, [GNN, QDA], StudyConfig(splits=4, seeds=1), CLASSIFICATION)
    assert entry(result, "graph_conv")["outcome"] == "missing_units"
    assert "nan" not in entry(result, "qda")["sentence"]


def test_the_reference_is_chosen_by_validation_not_by_test():
    # qda is ahead on test, fc on validation: the test split must not choose the reference.
    result = verdict(units({"fc": [0.80] * 4, "qda": [0.90] * 4}, {"fc": 0.95, "qda": 0.85}), [FC, QDA],
                     StudyConfig(splits=4, seeds=1), CLASSIFICATION)
    assert result["reference"] == "fc"


def test_a_graph_that_beats_its_rewiring_is_said_to_add_beyond_its_degrees():
    base = noisy(0.80, 0.02, 6)
    result = verdict(units({"graph_conv": base + noisy(0.15, 0.01, 7), "graph_conv, rewired": base, "qda": base + 0.1}),
                     [GNN, CONTROL, QDA], TEN_FOLDS, CLASSIFICATION)
    graph = entry(result, "graph_conv")["graph"]
    assert graph["outcome"] == "earns_its_keep" and graph["control"] == "graph_conv, rewired"
    assert graph["sentence"].startswith("graph_conv: the graph itself adds +0.1")
    assert "over a degree-preserving rewiring of it" in graph["sentence"]
    assert entry(result, "graph_conv, rewired")["outcome"] == "control"
    assert result["comparisons"] == 2  # graph_conv against qda, and against its control; Holm over both


def test_a_graph_level_with_its_rewiring_adds_nothing_beyond_its_degrees():
    base = noisy(0.90, 0.02, 8)
    result = verdict(units({"graph_conv": base + 0.001 * (-1) ** np.arange(10), "graph_conv, rewired": base, "qda": base - 0.05}),
                     [GNN, CONTROL, QDA], TEN_FOLDS, CLASSIFICATION)
    graph = entry(result, "graph_conv")["graph"]
    assert graph["outcome"] == "equivalent"
    assert "your graph adds nothing beyond its degrees" in graph["sentence"]
    assert entry(result, "graph_conv")["outcome"] == "earns_its_keep"  # a graph model can win without its graph mattering


def test_a_control_that_failed_is_named_in_the_graph_sentence():
    planted = units({"graph_conv": [0.9, 0.91, 0.92, 0.93], "graph_conv, rewired": [0.8] * 4, "qda": [0.8, 0.81, 0.82, 0.83]})
    planted.loc[planted["candidate"] == "graph_conv, rewired", ["status", "error"]] = ["failed", "ConfigError: nothing to swap"]
    result = verdict(planted, [GNN, CONTROL, QDA], StudyConfig(splits=4, seeds=1), CLASSIFICATION)
    graph = entry(result, "graph_conv")["graph"]
    assert graph["outcome"] == "no_control" and "nothing to swap" in graph["sentence"]
    assert entry(result, "graph_conv")["outcome"] != "missing_units"


def _comparison(low: float, high: float):
    planted = compare_paired(np.array([0.9, 0.92, 0.91]), np.array([0.9, 0.9, 0.9]), rope=0.01, folds=3)
    return replace(planted, low=low, high=high)


@pytest.mark.parametrize(("low", "high", "p", "outcome"), [
    (0.02, 0.05, 0.01, "earns_its_keep"), (0.02, 0.05, 0.2, "undecided"), (-0.005, 0.008, 0.5, "equivalent"),
    (-0.05, 0.005, 0.5, "does_not_earn_its_keep"), (-0.02, 0.03, 0.5, "undecided"),
])
def test_the_decision_rule_on_intervals(low, high, p, outcome):
    # HDI+ROPE decision rule (Kruschke 2018, "Rejecting or accepting parameter values in Bayesian estimation"), with a Holm-adjusted p.
    assert decide(_comparison(low, high), p, rope=0.01, alpha=0.05) == outcome


@pytest.mark.parametrize(("text", "message"), [
    ("train.lr: {low: 0.1, high: 0.01}\n", "train.lr="),
    ("arch.hidden: {choices: []}\n", "arch.hidden.choices=[] is not accepted"),
    ("train.lr: {low: 0, high: 0.1, log: true}\n", "log needs A > 0"),
    ("train.lr: {lo: 0.1}\n", "train.lr="),
])
def test_a_bad_search_space_is_one_line_naming_the_key(tmp_path, text, message):
    path = tmp_path / "fc.yaml"
    path.write_text(text)
    with pytest.raises(ConfigError, match=message.replace("[", r"\[").replace("]", r"\]")):
        read_space(path)


def test_across_datasets_writes_the_rank_test_and_its_critical_difference_diagram(tmp_path):
    # Friedman + Nemenyi over datasets (Demsar 2006), drawn by scikit-posthocs.
    from shiftbench.decision_study import across_datasets

    scores = pd.DataFrame({"graph_conv": [0.97, 0.95, 0.90, 0.93], "fc": [0.77, 0.90, 0.85, 0.80], "qda": [0.93, 0.80, 0.88, 0.91]},
                          index=["a", "b", "c", "d"])
    markdown = across_datasets(scores, dict.fromkeys(scores.index, "qda"), [GNN, FC], StudyConfig(), tmp_path)
    assert "Average ranks (1 is best): graph_conv 1.00" in markdown
    assert (tmp_path / "critical_difference.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_across_datasets_the_graph_candidate_gets_baycomps_signed_rank_probabilities_against_each_reference_and_its_control(tmp_path):
    # The Bayesian signed-rank test (Benavoli et al. 2017) as baycomp computes it on the same
    # pairs; each dataset's own reference is the one compared (here qda on a, b and fc on c, d).
    import baycomp

    from shiftbench.decision_study import across_datasets

    control = Candidate("graph_conv, rewired", ("arch=graph_conv",), "graph_conv", True, control_of="graph_conv")
    scores = pd.DataFrame({"graph_conv": [0.97, 0.95, 0.90, 0.93, 0.91], "graph_conv, rewired": [0.50, 0.52, 0.47, 0.55, 0.49],
                           "fc": [0.77, 0.90, 0.85, 0.80, 0.84], "qda": [0.93, 0.80, 0.88, 0.91, 0.70]}, index=list("abcde"))
    references = {"a": "qda", "b": "qda", "c": "fc", "d": "fc", "e": "qda"}
    markdown = across_datasets(scores, references, [GNN, control, FC], StudyConfig(rope=0.01), tmp_path)
    reference = np.array([0.93, 0.80, 0.85, 0.80, 0.70])
    better, equivalent, worse = baycomp.two_on_multiple(scores["graph_conv"].to_numpy(), reference, rope=0.01, random_state=0)
    assert (f"- graph_conv against each dataset's strongest graph-free candidate: probability {better:.2f} better by more than "
            f"the ROPE, {equivalent:.2f} equivalent, {worse:.2f} worse (5 datasets).") in markdown
    assert "- graph_conv against its degree-preserving rewiring: probability 1.00 better" in markdown
    assert "graph_conv, rewired against" not in markdown


def test_for_an_error_metric_lower_is_better_and_the_sentence_says_the_error_difference():
    # The same rule on RMSE: the reference is the floor with the lowest validation RMSE, and a
    # graph model whose test RMSE is clearly lower earns its keep, said as a negative difference.
    base = noisy(0.80, 0.01, 1)
    rows = units({"graph_conv": base - noisy(0.10, 0.01, 2), "fc": base + noisy(0.20, 0.01, 3), "ridge": base},
                 {"fc": 1.1, "ridge": 0.8, "graph_conv": 0.7})
    rows = rows.rename(columns={"test_accuracy": "test_rmse", "val_accuracy": "val_rmse"})
    ridge = Candidate("ridge", ("arch=ridge",), "ridge", False)
    result = verdict(rows, [GNN, FC, ridge], TEN_FOLDS, TASKS["regression"])
    assert result["reference"] == "ridge" and result["metric"] == "rmse" and result["better"] == "lower"
    assert entry(result, "graph_conv")["outcome"] == "earns_its_keep"
    assert entry(result, "graph_conv")["sentence"].startswith("graph_conv earns its keep over ridge: -0.1")
    assert entry(result, "fc")["outcome"] == "does_not_earn_its_keep"
    assert "fc does not earn its keep over ridge: +0.1" in entry(result, "fc")["sentence"]  # +0.199: an error said as it is


def test_floors_tied_on_validation_give_the_same_reference_in_any_list_order_and_the_verdict_names_the_tie():
    # Two floors at exactly the same validation figure: the one cheaper to train is the
    # reference whichever is listed first (the rule; common practice, no source).
    logistic = Candidate("logistic", ("arch=logistic",), "logistic", False)
    lda = Candidate("lda", ("arch=lda",), "lda", False)
    base = noisy(0.80, 0.02)
    rows = units({"graph_conv": base + 0.05, "logistic": base + 0.10, "lda": base - 0.05}, {"logistic": 0.975, "lda": 0.975})
    rows.loc[rows["candidate"] == "logistic", "train_seconds"] = 0.5
    first = verdict(rows, [GNN, lda, logistic], TEN_FOLDS, CLASSIFICATION)
    second = verdict(rows, [GNN, logistic, lda], TEN_FOLDS, CLASSIFICATION)
    assert first["reference"] == second["reference"] == "logistic"
    assert entry(first, "graph_conv")["outcome"] == entry(second, "graph_conv")["outcome"]
    assert entry(first, "logistic")["tied"] == ["lda"] and "It ties on validation with lda" in entry(first, "logistic")["sentence"]


def test_a_tuning_tie_goes_to_the_trial_with_the_fewest_parameters_then_the_earliest():
    from shiftbench.decision_protocol import tie_broken_best

    assert tie_broken_best([0.9875, 0.95, 0.9875, 0.9875], [5000, 100, 800, 800], True) == (2, 2)
    assert tie_broken_best([0.30, None, 0.20, 0.20], [10, 10, 50, 40], False) == (3, 1)
    assert tie_broken_best([0.5, 0.7], [1, 2], True) == (1, 0)


def test_a_rope_finer_than_one_test_samples_share_of_accuracy_is_warned_with_both_figures():
    # 120 samples in 3 folds: 40 test samples a fold, one of them 1/40 = 0.025 of accuracy.
    from shiftbench.data import sensor_regimes
    from shiftbench.decision import Settings
    from shiftbench.decision_study import study_warnings

    data = sensor_regimes(nodes=8, samples_per_class=30)
    (warning,) = study_warnings(data, Settings(StudyConfig(splits=3, rope=0.01), []))
    assert "decision.rope=0.01 is finer than one test sample's share of accuracy (1/40 = 0.0250" in warning
    assert study_warnings(data, Settings(StudyConfig(splits=3, rope=0.03), [])) == []


def test_fewer_folds_than_an_interval_needs_are_warned_before_any_job():
    from shiftbench.data import sensor_regimes
    from shiftbench.decision import Settings
    from shiftbench.decision_study import study_warnings

    data = sensor_regimes(nodes=8, samples_per_class=30)
    (warning,) = study_warnings(data, Settings(StudyConfig(splits=2, rope=0.5), []))
    assert warning.startswith("decision.splits=2 x decision.repetitions=1 gives 2 paired units, fewer than the 3 an interval needs")


def test_the_cost_ratio_reads_cpu_time_where_the_records_have_it_so_the_machines_load_does_not_move_it():
    # Same CPU seconds, the graph model's wall time inflated tenfold by load: the ratio is the CPU one.
    base = noisy(0.90, 0.02)
    rows = units({"graph_conv": base + noisy(0.06, 0.01, 1), "qda": base})
    rows["train_cpu_seconds"] = 2.0
    rows.loc[rows["candidate"] == "graph_conv", "train_seconds"] = 20.0
    result = verdict(rows, [GNN, QDA], TEN_FOLDS, CLASSIFICATION)
    cost = entry(result, "graph_conv")["cost"]
    assert cost["train_cpu_ratio"] == pytest.approx(1.0) and cost["train_seconds_ratio"] == pytest.approx(10.0)
    assert "1x the training CPU time" in entry(result, "graph_conv")["sentence"]
