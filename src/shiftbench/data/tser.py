"""Time-series extrinsic regression problems that the aeon package ships, read offline: a
continuous target per series (Tan et al. 2021, "Time series extrinsic regression", Data Mining
and Knowledge Discovery 35).

Nodes are time steps, features are channels, the native graph is the directed line graph, the
targets ``(samples, 1)``. The archive's train/test split is kept; the validation split is drawn at
random out of train (by the data seed). aeon is an optional dependency (the ``ucr`` extra).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, replace

import numpy as np

from shiftbench.config import declared, one_of
from shiftbench.data.dataset import DataConfig, Dataset, Splits, keyword_loader
from shiftbench.data.ucr import aeon_data_folder
from shiftbench.data.ucr import shipped_names as shipped_problems
from shiftbench.errors import ConfigError
from shiftbench.graphs.standard import line_graph
from shiftbench.registry import DATASETS, DatasetSource

# The regression problems aeon ships inside its package (no download needed).
SHIPPED = ("Covid3Month", "CardanoSentiment")


def shipped_names() -> tuple[str, ...]:
    """The shipped regression problems present in the installed aeon."""
    return shipped_problems(SHIPPED)


def _load_split(name: str, split: str) -> tuple[np.ndarray, np.ndarray]:
    """``(series (cases, channels, steps), targets (cases,))`` of the archive's ``split``."""
    folder = aeon_data_folder()
    # As for the classification problems: aeon reads the shipped files and writes nothing.
    os.environ.setdefault("AEON_DATA", str(folder))
    from aeon.datasets import load_regression

    return load_regression(name, split=split, extract_path=str(folder))


NORMALIZATIONS = ("series", "none")


def z_normalized(series: np.ndarray) -> np.ndarray:
    """Each series and channel to zero mean and unit variance over its steps (a constant one to
    zeros). Shapes: ``(samples, steps, channels)`` both ways."""
    centred = series - series.mean(axis=1, keepdims=True)
    spread = series.std(axis=1, keepdims=True)
    return np.divide(centred, spread, out=np.zeros_like(centred), where=spread > 0)


def tser(name: str = "Covid3Month", normalize: str = "series", seed: int = 0, val_fraction: float = 0.2) -> Dataset:
    """Load a shipped regression problem; ``normalize="series"`` z-normalizes each series and
    channel (the raw readings span five orders of magnitude in both problems).

    Returns:
        A dataset with signals ``(samples, steps, channels)`` float32 (the archive's train cases
        first, then its test cases) and targets ``(samples, 1)`` float32.
    """
    if name not in shipped_names():
        accepted = ", ".join(shipped_names()) or "none: install the ucr extra (pip install 'shiftbench[ucr]')"
        raise ConfigError(f"data.name={name!r} is not a regression dataset shipped with aeon; accepted: {accepted}")
    train_series, train_targets = _load_split(name, "train")
    test_series, test_targets = _load_split(name, "test")
    series = np.concatenate([train_series, test_series]).transpose(0, 2, 1)  # (samples, channels, steps) -> (samples, steps, channels)
    series = (z_normalized(series) if normalize == "series" else series).astype(np.float32)
    targets = np.concatenate([train_targets, test_targets]).astype(np.float32)[:, None]
    archive_train = np.random.default_rng(seed).permutation(len(train_targets))
    held = int(round(val_fraction * len(archive_train)))
    return Dataset(
        signals=series,
        labels=targets,
        splits=Splits(train=np.sort(archive_train[held:]), val=np.sort(archive_train[:held]),
                      test=np.arange(len(train_targets), len(targets))),
        classes=1,
        native_graph=replace(line_graph(series.shape[1]), name="time_line"),
        name=name,
    )


@dataclass
class TserConfig(DataConfig):
    """A regression series shipped with aeon; the archive's own train/test split is kept. The
    validation split comes out of the archive's train split; ``val_fraction: 0`` fits on all of
    it."""

    source: str = "tser"
    name: str = declared(one_of(shipped_names), "Covid3Month")
    normalize: str = declared(one_of(NORMALIZATIONS), "series")


DATASETS.add(DatasetSource("tser", TserConfig, keyword_loader(tser), "regression series", tasks=("regression",)))
