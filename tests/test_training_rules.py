"""Training rules of the time-series literature's networks: the batch size rule and which weights are kept."""

import pytest

from shiftbench.config import TrainConfig, batch_size_for, validate
from shiftbench.data import load_dataset
from shiftbench.models import build_model
from shiftbench.training import seed_everything, train


@pytest.mark.parametrize(("cases", "expected"), [(50, 5), (67, 6), (1000, 16), (5, 1)])
def test_batch_fraction_gives_the_literatures_batch_of_min_16_and_a_tenth_of_the_cases(cases, expected):
    # The rule min(16, cases / 10) (rounded down) of Fawaz et al. 2019, "Deep learning for time
    # series classification: a review" (from memory): GunPoint's 50 cases give 5, ItalyPowerDemand's 67 give 6.
    assert batch_size_for(TrainConfig(batch_size=16, batch_fraction=0.1), cases) == expected


def test_without_batch_fraction_the_batch_size_is_as_configured():
    assert batch_size_for(TrainConfig(batch_size=16), 50) == 16


@pytest.mark.parametrize("keep", ["last", "lowest_train_loss", "best_val"])
def test_the_kept_epoch_is_the_one_its_criterion_picks_from_the_curve(small_config, keep):
    # common practice, no source: the kept weights are those of the epoch the criterion ranks first
    # (ties: the earliest), and the reported validation accuracy is that epoch's.
    run = validate(small_config("arch=fc", "train.epochs=6", "train.patience=0", f"train.keep={keep}", "train.lr=0.05"))
    dataset = load_dataset(run.data)
    seed_everything(0)
    result = train(build_model(run.arch, dataset.nodes, dataset.features, dataset.classes, None), dataset, run.train, 0)
    curve = result.curve
    ranked = {
        "last": lambda row: row["epoch"],
        "lowest_train_loss": lambda row: -row["train_loss"],
        "best_val": lambda row: (row["val_accuracy"], -row["val_loss"]),
    }[keep]
    best = max(curve, key=lambda row: (ranked(row), -row["epoch"]))
    assert result.best_epoch == best["epoch"] and result.val_score == best["val_accuracy"]
