"""The node-level regression task: its masked loss, its metrics, and a job of each family on a
demo scenario with the records and tables that speak its metric."""

import math

import numpy as np
import pandas as pd
import pytest
import torch
from sklearn.metrics import mean_absolute_error, mean_squared_error, r2_score

from shiftbench.registry import TASKS
from tests.conftest import composed, home

TASK = TASKS["node_regression"]


def test_the_masked_loss_averages_squared_errors_over_the_scored_entries_only():
    # Worked by hand: scored errors 1 - 0 = 1, 2 - 4 = -2 and 0.5 - 0 = 0.5; their squares
    # 1, 4 and 0.25 average to 5.25 / 3 = 1.75. The NaN entries (not targets) count for nothing,
    # whatever the outputs there.
    outputs = torch.tensor([[[1.0], [100.0]], [[2.0], [0.5]]])
    targets = torch.tensor([[[0.0], [float("nan")]], [[4.0], [0.0]]])
    assert TASK.loss(outputs, targets).item() == pytest.approx(1.75)
    assert TASK.score(outputs, targets) == pytest.approx(math.sqrt(1.75))


def test_summed_tallies_give_scikit_learns_rmse_over_the_scored_entries():
    # Reference: scikit-learn's mean_squared_error on the scored entries, square-rooted.
    generator = torch.Generator().manual_seed(0)
    outputs = torch.randn(30, 12, 2, generator=generator)
    targets = torch.randn(30, 12, 2, generator=generator)
    targets[torch.rand(30, 12, 2, generator=generator) < 0.4] = float("nan")
    totals = [torch.stack(TASK.tally(outputs[start:start + 7], targets[start:start + 7])) for start in range(0, 30, 7)]
    summed = torch.stack(totals).sum(dim=0)
    scored = ~torch.isnan(targets)
    expected = math.sqrt(mean_squared_error(targets[scored].numpy(), outputs[scored].numpy()))
    assert TASK.finish(summed[0], summed[1]) == pytest.approx(expected, rel=1e-6)


def test_the_judgement_gives_scikit_learns_mae_and_r2_and_the_mean_prediction_floor():
    # Reference: scikit-learn's mean_absolute_error and r2_score on the scored entries; the floor
    # predicts each node's training mean (common practice, no source).
    rng = np.random.default_rng(1)
    train = rng.normal(size=(40, 5, 1)) + np.arange(5)[None, :, None]
    targets = rng.normal(size=(10, 5, 1)) + np.arange(5)[None, :, None]
    targets[rng.random(targets.shape) < 0.3] = np.nan
    predicted = targets + rng.normal(scale=0.3, size=targets.shape)
    judged = TASK.judge(targets, predicted, train, curve=[])
    scored = ~np.isnan(targets)
    floor = np.broadcast_to(train.mean(axis=0), targets.shape)[scored]
    assert judged["test_mae"] == pytest.approx(mean_absolute_error(targets[scored], predicted[scored]))
    assert judged["test_r2"] == pytest.approx(r2_score(targets[scored], predicted[scored]))
    assert judged["chance_rmse"] == pytest.approx(math.sqrt(mean_squared_error(targets[scored], floor)))
    assert judged["flags"] == []
    judged_floor = TASK.judge(targets, np.broadcast_to(train.mean(axis=0), targets.shape).copy(), train, curve=[])
    assert judged_floor["flags"] == ["at_chance"]


@pytest.mark.parametrize("data", ["sensor_forecast", "sensor_reconstruction"])
def test_every_family_runs_the_task_and_the_table_speaks_rmse(tmp_path, data):
    from shiftbench.job import run_job
    from shiftbench.report import write_report

    families = [["arch=fc"], ["arch=line_conv", "arch.readout=node"], ["arch=graph_conv", "arch.readout=node"]]
    for family in families:
        overrides = ["task=node_regression", f"data={data}", "data.samples=120", "data.nodes=20", "train.epochs=8",
                     f"results_dir={tmp_path}", *family]
        record = run_job(composed(overrides), None, overrides, live=False, quiet=True)
        assert record["status"] == "completed", record.get("error")
        assert record["test_rmse"] > 0 and record["chance_rmse"] > 0 and record["test_accuracy"] is None
        predictions = pd.read_csv(home(record) / "predictions.csv")
        scored = predictions["target"].to_numpy()
        assert math.sqrt(np.mean((predictions["predicted"].to_numpy() - scored) ** 2)) == pytest.approx(record["test_rmse"], rel=1e-4)
    text = write_report([tmp_path / "store"], tmp_path / "report")
    assert "test rmse ↓" in text and "rmse_vs_parameters.png" in text
    table = pd.read_csv(tmp_path / "report" / "summary.csv")
    assert {"test_rmse_mean", "test_rmse_ci95"} <= set(table.columns) and len(table) == 3


def test_the_claims_run_on_records_of_a_node_task_and_speak_its_metric(tmp_path):
    import json

    from shiftbench.claims_report import write_claims
    from shiftbench.job import run_job

    for family in (["arch=fc"], ["arch=graph_conv", "arch.readout=node"]):
        overrides = ["task=node_regression", "data=sensor_forecast", "data.samples=60", "data.nodes=12",
                     "train.epochs=2", f"results_dir={tmp_path}", *family]
        run_job(composed(overrides), None, overrides, live=False, quiet=True)
    text = write_claims([tmp_path / "store"], tmp_path / "claims", seeds=(0,), epochs=2)
    written = json.loads((tmp_path / "claims" / "claims.json").read_text())
    verdicts = {claim["id"]: claim["verdict"] for claim in written["claims"]}
    assert verdicts["line_graph_equivalence"] == verdicts["node_outputs"] == verdicts["permutation_equivariance"] == "holds"
    assert written["analyses"]["subject"]["task"] == "node_regression"
    assert "test_rmse" in written["analyses"]["graph_conv"] and "test rmse (mean)" in text


def test_the_nearest_floor_predicts_the_nearest_samples_values_filling_masked_ones_from_the_next():
    # Reference: scikit-learn's KNeighborsRegressor(n_neighbors=1) on the flattened signals where
    # every value is known; a value the nearest sample lacks comes from the next nearest.
    from sklearn.neighbors import KNeighborsRegressor

    from shiftbench.data.dataset import Dataset, Splits
    from shiftbench.graphs.standard import line_graph
    from shiftbench.models.nearest import fit_nearest

    rng = np.random.default_rng(4)
    signals = rng.normal(size=(40, 5, 1)).astype(np.float32)
    targets = rng.normal(size=(40, 5, 1)).astype(np.float32)
    splits = Splits(train=np.arange(30), val=np.arange(30, 30), test=np.arange(30, 40))
    data = Dataset(signals, targets, splits, 1, line_graph(5), "planted")
    result = fit_nearest(data, TASK)
    flat = signals.reshape(40, -1)
    reference = KNeighborsRegressor(n_neighbors=1).fit(flat[:30], targets[:30].reshape(30, -1)).predict(flat[30:])
    np.testing.assert_allclose(result.test_predictions.reshape(10, -1), reference)
    assert result.val_score is None  # no validation split

    masked = targets.copy()
    first = np.argsort(((flat[:30] - flat[30]) ** 2).sum(axis=1))  # the test sample 30's neighbours, nearest first
    masked[first[0], 2, 0] = np.nan
    data = Dataset(signals, masked, splits, 1, line_graph(5), "planted")
    predicted = fit_nearest(data, TASK).test_predictions
    assert predicted[0, 2, 0] == pytest.approx(masked[first[1], 2, 0])
    assert predicted[0, 1, 0] == pytest.approx(masked[first[0], 1, 0])
