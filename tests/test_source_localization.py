"""Source localization: each node scores itself, a softmax over the nodes names the source."""

import pandas as pd
import pytest
import torch

from shiftbench.registry import TASKS
from tests.conftest import composed, home

TASK = TASKS["source_localization"]


def test_the_loss_is_torch_cross_entropy_over_the_nodes_scores():
    # Reference: torch.nn.functional.cross_entropy on the (batch, nodes) scores.
    generator = torch.Generator().manual_seed(0)
    outputs = torch.randn(5, 7, 1, generator=generator)
    sources = torch.tensor([0, 6, 3, 3, 1])
    expected = torch.nn.functional.cross_entropy(outputs[:, :, 0], sources)
    assert TASK.loss(outputs, sources).item() == pytest.approx(expected.item())
    located = outputs[:, :, 0].argmax(dim=1)
    assert TASK.score(outputs, sources) == pytest.approx((located == sources).double().mean().item())


def test_every_family_locates_leaks_and_the_record_holds_accuracy_and_chance(tmp_path):
    from shiftbench.job import run_job

    families = [["arch=fc"], ["arch=line_conv", "arch.readout=node"], ["arch=graph_conv", "arch.readout=node"]]
    for family in families:
        overrides = ["task=source_localization", "data=sensor_leak", "data.samples=150", "data.nodes=20",
                     "train.epochs=6", f"results_dir={tmp_path}", *family]
        record = run_job(composed(overrides), None, overrides, live=False, quiet=True)
        assert record["status"] == "completed", record.get("error")
        predictions = pd.read_csv(home(record) / "predictions.csv")
        assert list(predictions.columns) == ["sample", "label", "predicted"] and predictions["predicted"].max() < 20
        assert (predictions["label"] == predictions["predicted"]).mean() == pytest.approx(record["test_accuracy"])
        assert 0 < record["chance_accuracy"] < 0.2
