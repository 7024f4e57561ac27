"""UCR/UEA time-series classification datasets that the aeon package ships, read offline.

Nodes are time steps, features are channels, the native graph is the directed line graph. The
archive's train/test split is kept; the validation split is carved out of train (stratified,
by the data seed). aeon is an optional dependency (the ``ucr`` extra).
"""

from __future__ import annotations

import importlib.util
import os
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from shiftbench.config import declared, one_of
from shiftbench.data.dataset import DataConfig, Dataset, Splits, keyword_loader
from shiftbench.data.labels import encode_labels
from shiftbench.errors import ConfigError
from shiftbench.graphs.standard import line_graph
from shiftbench.registry import DATASETS, DatasetSource

# The classification problems aeon ships inside its package (no download needed).
SHIPPED = (
    "ACSF1",
    "ArrowHead",
    "BasicMotions",
    "GunPoint",
    "ItalyPowerDemand",
    "JapaneseVowels",
    "OSULeaf",
    "PickupGestureWiimoteZ",
    "UnitTest",
)


def aeon_data_folder() -> Path | None:
    """The folder of aeon's shipped data, found without importing aeon (numba is slow to load)."""
    spec = importlib.util.find_spec("aeon")
    if spec is None or spec.origin is None:
        return None
    return Path(spec.origin).parent / "datasets" / "data"


def shipped_names(candidates: tuple[str, ...] = SHIPPED) -> tuple[str, ...]:
    """The ``candidates`` (default: the classification problems) present in the installed aeon
    (empty when aeon is not installed)."""
    folder = aeon_data_folder()
    if folder is None:
        return ()
    return tuple(name for name in candidates if (folder / name / f"{name}_TRAIN.ts").is_file())


def _load_split(name: str, split: str, folder: Path) -> tuple[np.ndarray, np.ndarray]:
    # aeon creates its data home (default ~/aeon_data) on some paths; point it at the shipped
    # folder, which exists, so nothing is written into the home directory.
    os.environ.setdefault("AEON_DATA", str(folder))
    from aeon.datasets import load_classification

    # extract_path points at the shipped files, so aeon neither downloads nor writes anything.
    series, labels = load_classification(name, split=split, extract_path=str(folder), load_equal_length=True)
    if not isinstance(series, np.ndarray):
        raise ConfigError(
            f"data.name={name!r} has series of unequal length and aeon ships no equal-length variant; "
            "accepted: an equal-length dataset"
        )
    return series, labels


def ucr(name: str = "GunPoint", seed: int = 0, val_fraction: float = 0.2) -> Dataset:
    """Load a shipped UCR/UEA problem.

    Returns:
        A dataset with signals ``(samples, length, channels)`` float32: the archive's train cases
        first, then its test cases; labels coded 0..C-1 in numeric (else text) order.
    """
    from sklearn.model_selection import train_test_split

    folder = aeon_data_folder()
    if folder is None or name not in shipped_names():
        accepted = ", ".join(shipped_names()) or "none: install the ucr extra (pip install 'shiftbench[ucr]')"
        raise ConfigError(f"data.name={name!r} is not a UCR dataset shipped with aeon; accepted: {accepted}")
    train_series, train_labels = _load_split(name, "train", folder)
    test_series, test_labels = _load_split(name, "test", folder)
    series = np.concatenate([train_series, test_series]).transpose(0, 2, 1).astype(np.float32)  # (samples, channels, steps) -> (samples, steps, channels)
    labels, names = encode_labels(np.concatenate([train_labels, test_labels]))

    archive_train = np.arange(len(train_labels))
    if val_fraction == 0:  # the whole archive train split is fitted on, as the archive's papers did
        train, val = archive_train, archive_train[:0]
    else:
        train, val = train_test_split(
            archive_train, test_size=val_fraction, stratify=labels[archive_train], random_state=seed
        )
    test = np.arange(len(train_labels), len(labels))
    return Dataset(
        signals=series,
        labels=labels,
        splits=Splits(train=np.sort(train), val=np.sort(val), test=test),
        classes=int(labels.max()) + 1,
        native_graph=replace(line_graph(series.shape[1]), name="time_line"),
        name=name,
        class_names=tuple(str(label) for label in names),
    )


@dataclass
class UcrConfig(DataConfig):
    """A UCR/UEA series shipped with aeon; the archive's own train/test split is kept. The
    validation split comes out of the archive's train split; ``val_fraction: 0`` fits on all of
    it."""

    source: str = "ucr"
    name: str = declared(one_of(shipped_names), "GunPoint")


DATASETS.add(DatasetSource("ucr", UcrConfig, keyword_loader(ucr), "UCR series"))
