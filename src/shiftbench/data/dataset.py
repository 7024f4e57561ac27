"""The dataset: signals on nodes, their labels, the split, and the graph the data carries."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import asdict, dataclass

import numpy as np

from shiftbench.config import Check, Schema, at_least, declared
from shiftbench.graphs.graph import Graph


@dataclass
class DataConfig(Schema):
    """What every data source has: the data seed and the validation share (0: no validation
    split, for runs whose ``train.keep`` chooses weights without one)."""

    source: str = "sensor_regimes"
    seed: int = declared(at_least(0), 0)
    val_fraction: float = declared(Check(lambda value: 0.0 <= value < 1.0, "a number in [0, 1) (0: no validation split)"), 0.2)

    def known_nodes(self) -> int | None:
        """The node count, when the config alone tells it (else it is known once loaded)."""
        return None

    def known_samples(self) -> int | None:
        """The sample count, when the config alone tells it (else it is known once loaded)."""
        return None


def keyword_loader(function: Callable[..., "Dataset"]) -> Callable[[DataConfig], "Dataset"]:
    """A loader taking a data config, for a function whose keyword arguments are the config's
    keys (all but ``source``)."""

    def load(config: DataConfig) -> Dataset:
        return function(**{key: value for key, value in asdict(config).items() if key != "source"})

    return load


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
        in_time_order: the samples are consecutive times (a forecast): every split keeps later
            samples out of the training part of an earlier test part (see ``splits.fold_split``).
        class_names: the label text of each class code, where the source named its classes
            (a file's string labels, an archive's class labels); empty where the codes are all.
    """

    signals: np.ndarray
    labels: np.ndarray
    splits: Splits
    classes: int
    native_graph: Graph
    name: str
    in_time_order: bool = False
    class_names: tuple[str, ...] = ()

    @property
    def samples(self) -> int:
        return int(self.signals.shape[0])

    @property
    def nodes(self) -> int:
        return int(self.signals.shape[1])

    @property
    def features(self) -> int:
        return int(self.signals.shape[2])
