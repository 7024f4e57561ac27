"""Time-series extrinsic regression problems shipped with aeon, and whole-signal regression on
them through the families and the ridge floor."""

import math

import numpy as np
import pandas as pd
import pytest

pytest.importorskip("aeon")

from shiftbench.data.tser import tser  # noqa: E402
from tests.conftest import composed, home  # noqa: E402


@pytest.mark.parametrize("name, train, test, steps, channels", [
    # Sizes from the archive's table (Tan et al. 2021, "Time series extrinsic regression", Data
    # Mining and Knowledge Discovery 35, table of datasets), as the files aeon ships hold them.
    ("Covid3Month", 140, 61, 84, 1),
    ("CardanoSentiment", 74, 33, 24, 2),
])
def test_the_shipped_problems_keep_the_archives_split_and_sizes(name, train, test, steps, channels):
    data = tser(name)
    assert data.signals.shape == (train + test, steps, channels) and data.labels.shape == (train + test, 1)
    assert len(data.splits.train) + len(data.splits.val) == train
    assert data.splits.test.tolist() == list(range(train, train + test))
    series = data.signals[:, :, 0]
    assert np.allclose(series.mean(axis=1), 0, atol=1e-5)  # z-normalized per series (common practice, no source)


def test_whole_signal_regression_runs_every_family_and_the_ridge_floor(tmp_path):
    from shiftbench.job import run_job

    records = {}
    for family in ("ridge", "fc", "line_conv", "graph_conv"):
        overrides = ["task=regression", "data=tser", f"arch={family}", "train.epochs=15", f"results_dir={tmp_path}"]
        record = run_job(composed(overrides), None, overrides, live=False, quiet=True)
        assert record["status"] == "completed", record.get("error")
        records[family] = record
    assert records["ridge"]["chosen"]["alpha"] in (0.1, 1.0, 10.0, 100.0, 1000.0)
    # The floor: the RMSE of predicting the training mean (scikit-learn's mean_squared_error);
    # a run no better than it is flagged.
    from sklearn.metrics import mean_squared_error

    data = tser("Covid3Month")
    train_mean = data.labels[data.splits.train].mean()
    floor = math.sqrt(mean_squared_error(data.labels[data.splits.test], np.full((61, 1), train_mean)))
    for record in records.values():
        assert record["chance_rmse"] == pytest.approx(floor, rel=1e-5)
        assert ("at_chance" in record["flags"]) == (record["test_rmse"] >= floor)
    predictions = pd.read_csv(home(records["graph_conv"]) / "predictions.csv")
    assert list(predictions.columns) == ["sample", "output", "target", "predicted"] and len(predictions) == 61
    rmse = math.sqrt(np.mean((predictions["predicted"] - predictions["target"]) ** 2))
    assert rmse == pytest.approx(records["graph_conv"]["test_rmse"], rel=1e-4)
