"""scikit-learn's handwritten digits: 8x8 images as signals on the pixel grid."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from shiftbench.data.dataset import Dataset, keyword_loader
from shiftbench.data.splits import RandomSplitConfig, stratified_splits
from shiftbench.graphs.standard import grid_graph
from shiftbench.registry import DATASETS, DatasetSource

SIDE = 8
# Pixel intensities in the shipped data run from 0 to 16.
MAX_INTENSITY = 16.0


def digits(seed: int = 0, val_fraction: float = 0.2, test_fraction: float = 0.2) -> Dataset:
    """1797 images in the shipped order, pixels scaled to [0, 1], nodes in raster order.

    Returns:
        A dataset with signals ``(1797, 64, 1)``, 10 classes, and the 8x8 grid as native graph.
    """
    from sklearn.datasets import load_digits

    bunch = load_digits()
    signals = (bunch.data / MAX_INTENSITY).astype(np.float32)[:, :, None]
    labels = bunch.target.astype(np.int64)
    return Dataset(
        signals=signals,
        labels=labels,
        splits=stratified_splits(labels, val_fraction, test_fraction, seed),
        classes=10,
        native_graph=replace(grid_graph(SIDE, SIDE), name="pixel_grid"),
        name="digits",
    )


@dataclass
class DigitsConfig(RandomSplitConfig):
    """scikit-learn's 8x8 handwritten digits."""

    source: str = "digits"

    def known_nodes(self) -> int | None:
        return SIDE * SIDE


DATASETS.add(DatasetSource("digits", DigitsConfig, keyword_loader(digits), "digits"))
