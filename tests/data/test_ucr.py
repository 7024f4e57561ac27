"""UCR series shipped with aeon: the archive's split, labels, and published figures."""

import os
from pathlib import Path

import numpy as np
import pytest
import torch

from shiftbench.config import validate
from shiftbench.data import load_dataset
from shiftbench.data.ucr import shipped_names, ucr
from shiftbench.errors import ConfigError
from shiftbench.models import build_model
from shiftbench.models.nearest import fit_nearest
from shiftbench.registry import TASKS
from shiftbench.training import seed_everything, train
from tests.conftest import composed



def test_the_archive_series_are_installed():
    # make test installs the ucr extra: a missing aeon fails here rather than skipping the checks below.
    assert {"GunPoint", "ItalyPowerDemand"} <= set(shipped_names())


@pytest.mark.parametrize(
    ("name", "published_error"),
    [("GunPoint", 0.0867), ("ItalyPowerDemand", 0.0447)],
)
def test_nearest_reproduces_the_archive_1nn_euclidean_error(name, published_error):
    # Source: the UCR Time Series Archive 2018, DataSummary table, column "ED (w=0)"
    # (Dau et al. 2019, "The UCR time series archive", IEEE/CAA J. Autom. Sinica 6(6)).
    result = fit_nearest(ucr(name), TASKS["classification"])
    assert round(1.0 - result.test_score, 4) == published_error


@pytest.mark.parametrize(
    ("name", "train", "test", "length", "classes"),
    [("GunPoint", 50, 150, 150, 2), ("ItalyPowerDemand", 67, 1029, 24, 2), ("BasicMotions", 40, 40, 100, 4)],
)
def test_the_archive_split_is_kept_and_validation_comes_out_of_train(name, train, test, length, classes):
    # Sizes from the archive's DataSummary table (Dau et al. 2019), from memory for BasicMotions.
    dataset = ucr(name)
    splits = dataset.splits
    assert dataset.nodes == length and dataset.classes == classes
    assert len(splits.train) + len(splits.val) == train and len(splits.test) == test
    assert splits.test.min() == train  # the archive's test cases follow its train cases


def test_multichannel_series_put_channels_in_features():
    dataset = ucr("BasicMotions")
    assert dataset.signals.shape[1:] == (100, 6)


def test_unequal_length_datasets_load_their_equal_length_variant():
    dataset = ucr("JapaneseVowels")
    assert dataset.signals.ndim == 3 and np.isfinite(dataset.signals).all()


def test_labels_follow_numeric_order_so_ten_comes_after_two():
    # ACSF1's classes are '0'..'9'; PickupGestureWiimoteZ's are '1'..'10'.
    dataset = ucr("PickupGestureWiimoteZ")
    assert sorted(set(dataset.labels.tolist())) == list(range(10))


def test_a_name_not_shipped_lists_the_shipped_names():
    with pytest.raises(ConfigError) as caught:
        ucr("Coffee")
    assert "GunPoint" in str(caught.value) and "\n" not in str(caught.value)


def test_loading_writes_nothing_into_the_home_directory(tmp_path, monkeypatch):
    monkeypatch.setenv("HOME", str(tmp_path))
    monkeypatch.delenv("AEON_DATA", raising=False)
    ucr("UnitTest")
    assert list(Path(tmp_path).iterdir()) == []
    assert os.environ.get("AEON_DATA") != str(tmp_path / "aeon_data")


def test_val_fraction_zero_fits_on_the_whole_archive_train_split(tmp_path):
    # Sizes from the archive's DataSummary table (Dau et al. 2019): GunPoint has 50 train cases.
    run = validate(composed([f"results_dir={tmp_path}", "data=ucr", "data.val_fraction=0", "arch=fc", "train.keep=last", "train.epochs=3"]))
    dataset = load_dataset(run.data)
    assert len(dataset.splits.train) == 50 and len(dataset.splits.val) == 0
    seed_everything(0)
    result = train(build_model(run.arch, dataset.nodes, dataset.features, dataset.classes, None), dataset, run.train, 0)
    assert result.val_score is None and result.best_epoch == result.epochs_run == 3


# Source for the published means: Fawaz et al. 2019, "Deep learning for time series
# classification: a review", Data Mining and Knowledge Discovery 33, results table (means over
# runs): GunPoint MLP 0.927, FCN 1.000; ItalyPowerDemand MLP 0.954, FCN 0.961 (from memory).
# The presets are those papers' networks and training rules; only the epoch budget is cut to
# keep the suite short (the full budgets' figures are in the README): the networks reach the
# published means within a few dozen epochs (ItalyPowerDemand) or a hundred (GunPoint).
@pytest.mark.parametrize(
    ("name", "preset", "epochs", "seeds", "published"),
    [
        ("GunPoint", "series_mlp", 100, 3, 0.927),
        ("GunPoint", "series_fcn", 40, 3, 1.000),
        ("ItalyPowerDemand", "series_mlp", 60, 2, 0.954),
        ("ItalyPowerDemand", "series_fcn", 20, 2, 0.961),
    ],
    ids=["GunPoint-MLP", "GunPoint-FCN", "ItalyPowerDemand-MLP", "ItalyPowerDemand-FCN"],
)
def test_the_presets_match_the_published_mean_accuracy_within_five_points(tmp_path, name, preset, epochs, seeds, published):
    accuracies = []
    for seed in range(seeds):
        run = validate(composed([f"results_dir={tmp_path}", "data=ucr", f"data.name={name}", f"+preset={preset}",
                                 f"train.epochs={epochs}", f"seed={seed}"]))
        dataset = load_dataset(run.data)
        torch.set_num_threads(run.threads)  # as a job computes (the thread count changes float sums)
        seed_everything(seed)
        model = build_model(run.arch, dataset.nodes, dataset.features, dataset.classes, shift=None)
        accuracies.append(train(model, dataset, run.train, seed=seed).test_score)
    assert abs(np.mean(accuracies) - published) <= 0.05
