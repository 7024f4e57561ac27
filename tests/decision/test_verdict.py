"""The verdict's rules on planted paired results, and the study's refusals of bad settings."""

import numpy as np
import pandas as pd
import pytest

from shiftbench.decision import Candidate, decide, read_space, verdict
from shiftbench.errors import ConfigError

GNN = Candidate("graph_conv", ("arch=graph_conv",), "graph_conv", True)
FC = Candidate("fc", ("arch=fc",), "fc", False)
QDA = Candidate("qda", ("arch=qda",), "qda", False)


def units(accuracy: dict[str, list[float]], val: dict[str, float] | None = None) -> pd.DataFrame:
    """Planted records: one row per candidate and (split, seed) unit."""
    rows = []
    for name, figures in accuracy.items():
        for unit, figure in enumerate(figures):
            rows.append({"candidate": name, "split": unit // 2, "seed": unit % 2, "status": "completed",
                         "test_accuracy": figure, "val_accuracy": (val or {}).get(name, figure),
                         "parameters": 1000 if name != "qda" else 0, "train_seconds": 2.0, "inference_seconds_per_sample": 1e-5})
    return pd.DataFrame(rows)


def entry(result, name):
    return next(e for e in result["candidates"] if e["candidate"] == name)


def test_a_graph_model_clearly_ahead_of_the_best_floor_earns_its_keep():
    rng = np.random.default_rng(0)
    base = 0.93 + rng.normal(0, 0.01, 10)
    result = verdict(units({"graph_conv": base + 0.04, "fc": base - 0.15, "qda": base}, {"fc": 0.7, "qda": 0.93, "graph_conv": 0.97}),
                     [GNN, FC, QDA], rope=0.01, alpha=0.05)
    assert result["reference"] == "qda"  # the best graph-free candidate, not fc
    assert entry(result, "graph_conv")["outcome"] == "earns_its_keep"
    assert entry(result, "graph_conv")["sentence"].startswith("graph_conv earns its keep over qda: +0.040 test accuracy (95% CI")
    assert entry(result, "fc")["outcome"] == "does_not_earn_its_keep"


def test_a_graph_model_level_with_the_floor_is_equivalent_within_the_rope():
    base = np.linspace(0.80, 0.90, 10)
    result = verdict(units({"graph_conv": base + 0.001 * (-1) ** np.arange(10), "qda": base}), [GNN, QDA], 0.01, 0.05)
    assert entry(result, "graph_conv")["outcome"] == "equivalent"
    assert "is equivalent within the ROPE to qda" in entry(result, "graph_conv")["sentence"]


def test_a_graph_that_carries_no_information_does_not_earn_its_keep():
    rng = np.random.default_rng(1)
    base = 0.9 + rng.normal(0, 0.01, 10)
    result = verdict(units({"graph_conv": base - 0.05 + rng.normal(0, 0.01, 10), "qda": base}), [GNN, QDA], 0.01, 0.05)
    assert entry(result, "graph_conv")["outcome"] == "does_not_earn_its_keep"


def test_a_wide_interval_is_undecided_and_asks_for_more_runs():
    result = verdict(units({"graph_conv": [0.9, 0.7, 0.95, 0.75], "qda": [0.8, 0.8, 0.8, 0.8]}), [GNN, QDA], 0.01, 0.05)
    assert entry(result, "graph_conv")["outcome"] == "undecided"
    assert "more runs needed (the interval crosses the ROPE)" in entry(result, "graph_conv")["sentence"]


def test_unpaired_units_are_named_instead_of_compared():
    planted = units({"graph_conv": [0.9, 0.91, 0.92, 0.93], "qda": [0.8, 0.81, 0.82, 0.83]})
    planted.loc[(planted["candidate"] == "graph_conv") & (planted["split"] == 1) & (planted["seed"] == 0), "status"] = "failed"
    result = verdict(planted, [GNN, QDA], 0.01, 0.05)
    assert entry(result, "graph_conv")["outcome"] == "missing_units"
    assert "no completed run for split 1 seed 0" in entry(result, "graph_conv")["sentence"]


def test_the_reference_is_chosen_by_validation_not_by_test():
    # qda is ahead on test, fc on validation: the test split must not choose the reference.
    result = verdict(units({"fc": [0.80] * 4, "qda": [0.90] * 4}, {"fc": 0.95, "qda": 0.85}), [FC, QDA], 0.01, 0.05)
    assert result["reference"] == "fc"


@pytest.mark.parametrize(("low", "high", "p", "outcome"), [
    (0.02, 0.05, 0.01, "earns_its_keep"), (0.02, 0.05, 0.2, "undecided"), (-0.005, 0.008, 0.5, "equivalent"),
    (-0.05, 0.005, 0.5, "does_not_earn_its_keep"), (-0.02, 0.03, 0.5, "undecided"),
])
def test_the_decision_rule_on_intervals(low, high, p, outcome):
    # HDI+ROPE decision rule (Kruschke 2018, "Rejecting or accepting parameter values in Bayesian estimation"), with a Holm-adjusted p.
    assert decide(low, high, p, rope=0.01, alpha=0.05) == outcome


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
    markdown = across_datasets(scores, tmp_path, alpha=0.05)
    assert "Average ranks (1 is best): graph_conv 1.00" in markdown
    assert (tmp_path / "critical_difference.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_for_an_error_metric_lower_is_better_and_the_sentence_says_the_error_difference():
    # The same rule on RMSE: the reference is the floor with the lowest validation RMSE, and a
    # graph model whose test RMSE is clearly lower earns its keep, said as a negative difference.
    from shiftbench.registry import TASKS

    rng = np.random.default_rng(1)
    base = 0.80 + rng.normal(0, 0.01, 10)
    rows = units({"graph_conv": base - 0.10, "fc": base + 0.20, "ridge": base}, {"fc": 1.1, "ridge": 0.8, "graph_conv": 0.7})
    rows = rows.rename(columns={"test_accuracy": "test_rmse", "val_accuracy": "val_rmse"})
    ridge = Candidate("ridge", ("arch=ridge",), "ridge", False)
    result = verdict(rows, [GNN, FC, ridge], rope=0.01, alpha=0.05, task=TASKS["regression"])
    assert result["reference"] == "ridge" and result["metric"] == "rmse" and result["better"] == "lower"
    assert entry(result, "graph_conv")["outcome"] == "earns_its_keep"
    assert entry(result, "graph_conv")["sentence"].startswith("graph_conv earns its keep over ridge: -0.100 test rmse (95% CI -0.")
    assert entry(result, "fc")["outcome"] == "does_not_earn_its_keep"
    assert "+0.200 test rmse" in entry(result, "fc")["sentence"]
