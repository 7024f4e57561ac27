"""The non-neural floor: 1-nearest-neighbour on the flattened signals (Euclidean distance).

It has nothing to tune, so its reference set for the test split is every labelled sample
outside it (train and validation: for the UCR archive, exactly the archive's train split). Its
validation figure uses the training split alone as reference. It predicts the nearest sample's
target: its class (or source node), or its values or classes on every node; an entry the nearest
sample does not have (a node that is not one of its targets) comes from the next nearest that
has it, else from the reference (its mean value, or its most frequent class).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from shiftbench.data.dataset import Dataset
from shiftbench.registry import FAMILIES, Family, Task
from shiftbench.training_result import TrainingResult

# Neighbours searched for a value the nearest sample lacks (masked node targets).
FILL_NEIGHBOURS = 10


def _predict(reference: np.ndarray, queries: np.ndarray, dataset: Dataset) -> np.ndarray:
    """The 1-NN prediction for each of ``queries`` with ``reference`` samples (index arrays):
    shaped as the targets of ``queries``."""
    from sklearn.neighbors import KNeighborsClassifier, NearestNeighbors

    flat = dataset.signals.reshape(dataset.samples, -1)  # (samples, nodes * features)
    targets = dataset.labels
    if targets.ndim == 1:  # classes or source nodes
        classifier = KNeighborsClassifier(n_neighbors=1, algorithm="brute").fit(flat[reference], targets[reference])
        return classifier.predict(flat[queries])
    classes = targets.dtype.kind in "iu"  # classes on every node, -1 where not a target; else values, NaN
    lacking = (lambda entries: entries < 0) if classes else np.isnan
    searched = NearestNeighbors(n_neighbors=min(FILL_NEIGHBOURS, len(reference)), algorithm="brute").fit(flat[reference])
    order = searched.kneighbors(flat[queries], return_distance=False)  # (queries, neighbours), nearest first
    known = targets[reference]
    predicted = np.full((len(queries), *targets.shape[1:]), -1 if classes else np.nan, dtype=targets.dtype if classes else np.float64)
    for rank in range(order.shape[1]):  # nearest first: fill what is still missing
        missing = lacking(predicted)
        predicted[missing] = known[order[:, rank]][missing]
    if classes:
        return np.where(predicted < 0, np.bincount(known[known >= 0]).argmax(), predicted)
    mean = np.broadcast_to(np.nanmean(known, axis=0), predicted.shape)
    return np.where(np.isnan(predicted), np.nan_to_num(mean), predicted)


def fit_nearest(dataset: Dataset, task: Task) -> TrainingResult:
    """Fit and score the 1-NN floor with the task's metric; ``train_seconds`` is the time to fit
    and predict the test split."""
    splits = dataset.splits
    labelled = np.concatenate([splits.train, splits.val])
    started, cpu_started = time.perf_counter(), time.process_time()
    predicted = _predict(labelled, splits.test, dataset)
    seconds, cpu_seconds = time.perf_counter() - started, time.process_time() - cpu_started

    def score(reference: np.ndarray, queries: np.ndarray) -> float:
        return task.score_predicted(_predict(reference, queries, dataset), dataset.labels[queries])

    return TrainingResult(
        train_score=score(splits.train, splits.train),
        val_score=score(splits.train, splits.val) if len(splits.val) else None,
        test_score=task.score_predicted(predicted, dataset.labels[splits.test]),
        test_loss=None,
        best_epoch=None,
        epochs_run=None,
        train_seconds=seconds,
        train_cpu_seconds=cpu_seconds,
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
        fit=lambda arch, dataset, seed, task: fit_nearest(dataset, task),
        marker="x",
    )
)
