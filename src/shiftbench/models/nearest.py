"""The non-neural floor: 1-nearest-neighbour on the flattened signals (Euclidean distance).

It has nothing to tune, so its reference set for the test split is every labelled sample
outside it (train and validation: for the UCR archive, exactly the archive's train split). Its
validation accuracy uses the training split alone as reference.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from shiftbench.data.dataset import Dataset
from shiftbench.registry import FAMILIES, Family
from shiftbench.training_result import TrainingResult


def _predict(reference: np.ndarray, queries: np.ndarray, dataset: Dataset) -> np.ndarray:
    """The 1-NN class of each of ``queries`` with ``reference`` samples (index arrays)."""
    from sklearn.neighbors import KNeighborsClassifier

    flat = dataset.signals.reshape(dataset.samples, -1)  # (samples, nodes * features)
    classifier = KNeighborsClassifier(n_neighbors=1, algorithm="brute").fit(flat[reference], dataset.labels[reference])
    return classifier.predict(flat[queries])


def _accuracy(reference: np.ndarray, queries: np.ndarray, dataset: Dataset) -> float:
    """Accuracy on ``queries`` of 1-NN with ``reference`` samples (index arrays)."""
    return float((_predict(reference, queries, dataset) == dataset.labels[queries]).mean())


def fit_nearest(dataset: Dataset) -> TrainingResult:
    """Fit and score the 1-NN floor; ``train_seconds`` is the time to fit and predict the test split."""
    splits = dataset.splits
    labelled = np.concatenate([splits.train, splits.val])
    started = time.perf_counter()
    predicted = _predict(labelled, splits.test, dataset)
    seconds = time.perf_counter() - started
    test_accuracy = float((predicted == dataset.labels[splits.test]).mean())
    return TrainingResult(
        train_score=_accuracy(splits.train, splits.train, dataset),
        val_score=_accuracy(splits.train, splits.val, dataset),
        test_score=test_accuracy,
        test_loss=None,
        best_epoch=None,
        epochs_run=None,
        train_seconds=seconds,
        samples_per_second=len(labelled) / max(seconds, 1e-9),
        curve=[],
        inference_seconds_per_sample=seconds / max(len(splits.test), 1),
        test_predictions=predicted,
    )


@dataclass
class NearestConfig:
    """The non-neural floor: 1-nearest-neighbour on the flattened signals (Euclidean)."""

    family: str = "nearest"


FAMILIES.add(
    Family(
        name="nearest",
        schema=NearestConfig,
        display="1-NN floor",
        planned_parameters=lambda arch, nodes, features, outputs, head: 0,
        fit=lambda arch, dataset, seed, task: fit_nearest(dataset),
        marker="x",
        tasks=("classification",),
    )
)
