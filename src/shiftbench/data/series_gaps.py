"""Real series with gaps to fill: a UCR/UEA problem shipped with aeon (see :mod:`data.ucr`) with
a share ``masked`` of each series' time steps hidden, for ``task=node_regression``.

Nodes are time steps (native graph: the directed line graph in time order; ``graph=path`` gives
each step both neighbours). A hidden step's readings are set to 0 and are the targets; the
features are every channel's reading and a flag that is 1 where the step was observed. The
archive's train/test split and the classification source's validation split are kept.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from shiftbench.config import FRACTION, declared, one_of
from shiftbench.data.dataset import DataConfig, Dataset, keyword_loader
from shiftbench.data.ucr import shipped_names, ucr
from shiftbench.registry import DATASETS, DatasetSource


def series_gaps(name: str = "GunPoint", masked: float = 0.3, seed: int = 0, val_fraction: float = 0.2) -> Dataset:
    """Load a shipped UCR problem and hide a share ``masked`` of each series' steps (drawn by
    ``seed``; at least one hidden and one observed a series).

    Returns:
        A dataset with signals ``(samples, steps, channels + 1)`` (readings, 0 where hidden,
        then the observed flag) and targets ``(samples, steps, channels)``: the hidden readings,
        NaN where observed.
    """
    series = ucr(name, seed, val_fraction)
    readings = series.signals.astype(np.float64)  # (samples, steps, channels)
    samples, steps, _ = readings.shape
    rng = np.random.default_rng(seed)
    hidden = rng.random((samples, steps)) < masked
    hidden[np.arange(samples), rng.integers(steps, size=samples)] = True
    observed = ~hidden
    observed[np.arange(samples), rng.integers(steps, size=samples)] = True
    hidden = ~observed
    signals = np.concatenate([np.where(observed[:, :, None], readings, 0.0), observed[:, :, None]], axis=2)
    targets = np.where(hidden[:, :, None], readings, np.nan)
    return replace(
        series, signals=signals.astype(np.float32), labels=targets.astype(np.float32), classes=readings.shape[2],
        name=f"{name}_gaps",
    )


@dataclass
class SeriesGapsConfig(DataConfig):
    """A UCR series shipped with aeon with a share ``masked`` of its steps hidden."""

    source: str = "series_gaps"
    name: str = declared(one_of(shipped_names), "GunPoint")
    masked: float = declared(FRACTION, 0.3)


DATASETS.add(DatasetSource(
    "series_gaps", SeriesGapsConfig, keyword_loader(series_gaps), "UCR series with gaps", tasks=("node_regression",),
))
