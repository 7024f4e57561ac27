"""What a finished run leaves beside its record: test predictions, per-class figures, weights
that load without pickle, and flags on a run that learned nothing."""

import json

import numpy as np
import pandas as pd
import pytest
import torch
from sklearn.metrics import balanced_accuracy_score, confusion_matrix, f1_score

from shiftbench.config import validate
from shiftbench.data import load_dataset
from shiftbench.job import run_job
from shiftbench.models import build_model
from shiftbench.records import PREDICTIONS_FILE, RECORD_FILE, WEIGHTS_FILE
from shiftbench.task import judge_classification
from tests.conftest import home


def test_saved_weights_load_without_pickle_and_reproduce_the_test_predictions(small_config):
    config = small_config("arch=fc")
    record = run_job(config, None, [], live=False, quiet=True)
    run = validate(config)
    dataset = load_dataset(run.data)
    model = build_model(run.arch, dataset.nodes, dataset.features, dataset.classes, None)
    with np.load(home(record) / WEIGHTS_FILE, allow_pickle=False) as weights:
        model.load_state_dict({name: torch.from_numpy(weights[name]) for name in weights.files})
    model.eval()
    test = dataset.splits.test
    with torch.no_grad():
        predicted = model(torch.from_numpy(dataset.signals[test])).argmax(1).numpy()
    saved = pd.read_csv(home(record) / PREDICTIONS_FILE)
    np.testing.assert_array_equal(saved["sample"], test)
    np.testing.assert_array_equal(saved["predicted"], predicted)
    assert (saved["predicted"] == saved["label"]).mean() == pytest.approx(record["test_accuracy"])


@pytest.mark.parametrize("family", ["graph_conv", "nearest", "logistic"])
def test_the_record_keeps_per_class_figures_as_scikit_learn_computes_them(small_config, family):
    # Reference: scikit-learn's balanced_accuracy_score, f1_score(average="macro"), confusion_matrix.
    record = run_job(small_config(f"arch={family}"), None, [], live=False, quiet=True)
    written = json.loads((home(record) / RECORD_FILE).read_text())
    saved = pd.read_csv(home(record) / PREDICTIONS_FILE)
    labels, predicted = saved["label"].to_numpy(), saved["predicted"].to_numpy()
    assert written["balanced_accuracy"] == pytest.approx(balanced_accuracy_score(labels, predicted))
    assert written["macro_f1"] == pytest.approx(f1_score(labels, predicted, average="macro"))
    assert written["confusion_matrix"] == confusion_matrix(labels, predicted).tolist()
    assert (home(record) / WEIGHTS_FILE).is_file() == (family == "graph_conv")


def test_a_run_predicting_one_class_is_flagged_at_chance():
    labels = np.array([0, 0, 0, 1, 1, 2])
    judged = judge_classification(labels, np.zeros(6, dtype=int), np.array([0, 0, 1, 2]), [])
    assert judged["chance_accuracy"] == 0.5  # the training majority class 0 is half the test labels
    assert judged["flags"] == ["at_chance"]


def test_a_run_whose_training_loss_never_fell_is_flagged():
    curve = [{"train_loss": loss} for loss in (1.10, 1.12, 1.10, 1.30)]
    judged = judge_classification(np.array([0, 1, 1]), np.array([0, 1, 1]), np.array([0, 1]), curve)
    assert judged["flags"] == ["loss_never_fell"]


def test_a_run_that_learned_is_not_flagged():
    curve = [{"train_loss": loss} for loss in (1.1, 0.7, 0.4)]
    judged = judge_classification(np.array([0, 1, 1, 0]), np.array([0, 1, 1, 0]), np.array([1, 1, 0]), curve)
    assert judged["flags"] == []


def test_string_class_names_are_kept_through_record_predictions_and_the_reports_per_class_figures(tmp_path):
    # Reference: scikit-learn's precision_recall_fscore_support on the written predictions.
    from sklearn.metrics import precision_recall_fscore_support

    from shiftbench.job import run_job
    from shiftbench.records import PREDICTIONS_FILE
    from shiftbench.report import write_report
    from tests.conftest import composed, home

    rng = np.random.default_rng(0)
    names = np.array(["steady", "surge", "leak"])
    codes = np.repeat([0, 1, 2], 30)
    signals = rng.standard_normal((90, 6)) + codes[:, None] * (np.arange(6) < 2)
    np.savez(tmp_path / "sig.npz", signals=signals.astype(np.float32), labels=names[codes])
    overrides = ["data=file", f"data.path={tmp_path / 'sig.npz'}", "arch=fc", "train.epochs=5", f"results_dir={tmp_path}"]
    record = run_job(composed(overrides), tmp_path / "sweep", overrides, live=False, quiet=True)
    assert record["class_names"] == ["leak", "steady", "surge"]  # sorted as text: the codes 0, 1, 2
    predictions = pd.read_csv(home(record) / PREDICTIONS_FILE)
    assert (predictions["label_name"] == [record["class_names"][code] for code in predictions["label"]]).all()
    assert (predictions["predicted_name"] == [record["class_names"][code] for code in predictions["predicted"]]).all()
    precision, recall, f1, support = precision_recall_fscore_support(predictions["label"], predictions["predicted"],
                                                                     labels=[0, 1, 2], zero_division=0)
    np.testing.assert_allclose(record["per_class"]["f1"], f1)
    np.testing.assert_allclose(record["per_class"]["recall"], recall)
    assert record["per_class"]["support"] == support.tolist()
    write_report([tmp_path / "sweep"], tmp_path / "out")
    summary = pd.read_csv(tmp_path / "out" / "summary.csv")
    assert summary.loc[0, "f1[surge]"] == pytest.approx(f1[2]) and summary.loc[0, "precision[leak]"] == pytest.approx(precision[0])
