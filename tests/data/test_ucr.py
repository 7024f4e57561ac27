"""UCR series shipped with aeon: the archive's split, labels, and published figures."""

import os
from pathlib import Path

import numpy as np
import pytest

from shiftbench.config import TrainConfig

from shiftbench.models.fc import FcConfig

from shiftbench.models.line_conv import LineConvConfig
from shiftbench.data.ucr import shipped_names, ucr
from shiftbench.errors import ConfigError
from shiftbench.models import build_model
from shiftbench.models.nearest import fit_nearest
from shiftbench.training import seed_everything, train



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
    result = fit_nearest(ucr(name))
    assert round(1.0 - result.test_accuracy, 4) == published_error


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


# Source for the published means: Fawaz et al. 2019, "Deep learning for time series
# classification: a review", Data Mining and Knowledge Discovery 33, results table (means over
# runs): GunPoint MLP 0.927, FCN 1.000; ItalyPowerDemand MLP 0.954, FCN 0.961.
#
# What differs from their set-ups, as far as the tool allows:
# - MLP: three hidden layers of 500 as theirs; one dropout rate (0.2) for all layers where
#   theirs rise from 0.1 to 0.3; Adam for a few hundred epochs instead of Adadelta for 5000.
# - FCN: three conv layers with batch norm and ReLU, then global average pooling, as theirs, but
#   64-128-64 channels (theirs 128-256-128), one kernel size 8 for all layers (theirs 8, 5, 3),
#   and causal zero padding (theirs "same" padding).
# - Both train on 80% of the archive's train split and stop early on the other 20%.
MLP = FcConfig(hidden=[500, 500, 500], dropout=0.2)
FCN = LineConvConfig(order=7, channels=[64, 128, 64], normalization="batch")
SCHEDULES = {"fc": TrainConfig(lr=0.001, epochs=300, patience=100, batch_size=16),
             "line_conv": TrainConfig(lr=0.001, epochs=150, patience=50, batch_size=16)}


@pytest.mark.parametrize(
    ("name", "arch", "published"),
    [
        ("GunPoint", MLP, 0.927),
        ("GunPoint", FCN, 1.000),
        ("ItalyPowerDemand", MLP, 0.954),
        ("ItalyPowerDemand", FCN, 0.961),
    ],
    ids=["GunPoint-MLP", "GunPoint-FCN", "ItalyPowerDemand-MLP", "ItalyPowerDemand-FCN"],
)
def test_networks_match_the_published_mean_accuracy_within_five_points(name, arch, published):
    dataset = ucr(name)
    accuracies = []
    for seed in range(3):
        seed_everything(seed)
        model = build_model(arch, dataset.nodes, dataset.features, dataset.classes, shift=None)
        accuracies.append(train(model, dataset, SCHEDULES[arch.family], seed=seed).test_accuracy)
    assert abs(np.mean(accuracies) - published) <= 0.05
