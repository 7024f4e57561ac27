"""Datasets: the demo scenario, digits, UCR series, the user's files, and the splits. Each data
source declares itself in the registry (``data.source``)."""

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.digits import digits
from shiftbench.data.files import load_signal_file
from shiftbench.data.sensor_regimes import sensor_regimes
from shiftbench.data.splits import fold_split, resplit
from shiftbench.data.ucr import ucr
from shiftbench.registry import DATASETS

__all__ = ["Dataset", "Splits", "digits", "load_dataset", "load_signal_file", "sensor_regimes", "ucr"]


def load_dataset(config, split: int = 0, folds: int = 0) -> Dataset:
    """The dataset a validated data config names, under random split number ``split`` (with
    ``folds`` K >= 2: outer fold ``split`` of repeated K-fold, see :func:`fold_split`)."""
    dataset = DATASETS[config.source].load(config)
    return fold_split(dataset, folds, split) if folds else resplit(dataset, split)
