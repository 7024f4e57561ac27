"""Node classification: a class on every node, -1 where a node is not a target."""

import numpy as np
import pandas as pd
import pytest
import torch
from sklearn.metrics import accuracy_score, f1_score

from shiftbench.registry import TASKS
from tests.conftest import composed, home

TASK = TASKS["node_classification"]


def test_the_loss_is_torch_cross_entropy_over_the_scored_nodes_only():
    # Reference: torch.nn.functional.cross_entropy on the scored (node, class-score) rows alone.
    generator = torch.Generator().manual_seed(0)
    outputs = torch.randn(3, 4, 5, generator=generator)
    labels = torch.tensor([[0, -1, 4, 2], [-1, -1, 1, 1], [3, 0, -1, 2]])
    scored = labels >= 0
    expected = torch.nn.functional.cross_entropy(outputs[scored], labels[scored])
    assert TASK.loss(outputs, labels).item() == pytest.approx(expected.item())


def test_accuracy_and_the_judgement_agree_with_scikit_learn_on_the_scored_nodes():
    rng = np.random.default_rng(0)
    labels = rng.integers(0, 3, size=(20, 6))
    labels[rng.random(labels.shape) < 0.3] = -1
    logits = torch.from_numpy(rng.normal(size=(20, 6, 3)))
    predicted = logits.argmax(dim=2).numpy()
    scored = labels >= 0
    expected = accuracy_score(labels[scored], predicted[scored])
    assert TASK.score(logits, torch.from_numpy(labels)) == pytest.approx(expected)
    assert TASK.score_predicted(predicted, labels) == pytest.approx(expected)
    judged = TASK.judge(labels, predicted, labels, curve=[])
    assert judged["macro_f1"] == pytest.approx(f1_score(labels[scored], predicted[scored], average="macro"))


def test_every_family_and_the_nearest_floor_classify_every_node(tmp_path):
    from shiftbench.job import run_job

    families = [["arch=fc"], ["arch=nearest"], ["arch=line_conv", "arch.readout=node"], ["arch=graph_conv", "arch.readout=node"]]
    for family in families:
        overrides = ["task=node_classification", "data=sensor_zones", "data.samples=80", "data.nodes=20", "data.zones=2",
                     "train.epochs=4", f"results_dir={tmp_path}", *family]
        record = run_job(composed(overrides), None, overrides, live=False, quiet=True)
        assert record["status"] == "completed", record.get("error")
        predictions = pd.read_csv(home(record) / "predictions.csv")
        assert list(predictions.columns) == ["sample", "node", "label", "predicted"] and len(predictions) == 16 * 20
        assert (predictions["label"] == predictions["predicted"]).mean() == pytest.approx(record["test_accuracy"])
