"""The dataset: signals on nodes, their labels, the split, and the graph the data carries."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from shiftbench.graphs.graph import Graph


@dataclass(frozen=True)
class Splits:
    """Index arrays (int64) into a dataset's samples; disjoint, together covering every sample."""

    train: np.ndarray
    val: np.ndarray
    test: np.ndarray


@dataclass(frozen=True)
class Dataset:
    """A labelled set of graph signals.

    Attributes:
        signals: ``(samples, nodes, features)`` float32.
        labels: ``(samples,)`` int64 in ``0 .. classes - 1``.
        splits: train/val/test indices.
        classes: number of classes.
        native_graph: the graph the data carries (sensor links, pixel grid, time line).
        name: the dataset's name in records.
    """

    signals: np.ndarray
    labels: np.ndarray
    splits: Splits
    classes: int
    native_graph: Graph
    name: str

    @property
    def samples(self) -> int:
        return int(self.signals.shape[0])

    @property
    def nodes(self) -> int:
        return int(self.signals.shape[1])

    @property
    def features(self) -> int:
        return int(self.signals.shape[2])
