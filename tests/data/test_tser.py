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


def test_gaps_in_real_series_are_filled_from_their_time_neighbours():
    # Linear interpolation between the nearest observed steps (numpy.interp) against the mean of
    # each step over the training series (the floor), and against interpolating in a shuffled
    # step order (the same readings without their time structure).
    from shiftbench.data.series_gaps import series_gaps

    data = series_gaps("GunPoint", masked=0.3)
    assert data.signals.shape == (200, 150, 2) and data.labels.shape == (200, 150, 1)
    observed = data.signals[:, :, 1] == 1
    assert np.array_equal(np.isnan(data.labels[:, :, 0]), observed) and (data.signals[:, :, 0][~observed] == 0).all()
    test = data.splits.test
    truth, readings = data.labels[test, :, 0], data.signals[test, :, 0]

    def interpolated(order):
        filled = []
        for row, seen in zip(readings[:, order], observed[test][:, order]):
            steps = np.arange(len(row))
            filled.append(np.interp(steps, steps[seen], row[seen]))
        return np.array(filled)[:, np.argsort(order)]

    hidden = ~observed[test]
    steps = data.labels.shape[1]
    along_time = rmse(interpolated(np.arange(steps))[hidden], truth[hidden])
    shuffled = rmse(interpolated(np.random.default_rng(0).permutation(steps))[hidden], truth[hidden])
    floor = rmse(np.broadcast_to(np.nanmean(data.labels[data.splits.train, :, 0], axis=0), truth.shape)[hidden], truth[hidden])
    assert along_time < 0.2 * floor and along_time < 0.2 * shuffled


def rmse(predicted, truth):
    return float(np.sqrt(np.mean((predicted - truth) ** 2)))
