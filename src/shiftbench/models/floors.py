"""Graph-free floors from scikit-learn, each tuned on the validation split with a small grid:
logistic regression, shrinkage LDA, regularized QDA and a random forest for classification;
ridge regression for whole-signal regression.

A floor is fitted on the training split once per grid value; the value with the best validation
figure of the task's metric (the first such in grid order) is kept and scored on the test split. Like the neural
families, floors never train on the validation split, so every candidate sees the same data.
Signals are flattened to ``(samples, nodes * features)``; the linear floors standardize them.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from shiftbench.data.dataset import Dataset
from shiftbench.registry import FAMILIES, Family, Task
from shiftbench.training_result import TrainingResult

# scikit-learn is imported where a floor is made: loading it costs about as much as torch, and
# most commands never fit a floor.


@dataclass(frozen=True)
class Floor:
    """A scikit-learn classifier and the grid its one hyperparameter is chosen from.

    Attributes:
        make: ``(value, seed) -> estimator``.
        key: the hyperparameter's name in records.
        grid: the values tried, in order.
        tasks: the tasks it serves.
    """

    make: Callable[[Any, int], Any]
    key: str
    grid: tuple[Any, ...]
    tasks: tuple[str, ...] = ("classification",)


def logistic(c: float, seed: int) -> Any:
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return make_pipeline(StandardScaler(), LogisticRegression(C=c, max_iter=2000))


def lda(shrinkage: Any, seed: int) -> Any:
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    return LinearDiscriminantAnalysis(solver="lsqr", shrinkage=shrinkage)


def qda(reg_param: float, seed: int) -> Any:
    from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis

    return QuadraticDiscriminantAnalysis(reg_param=reg_param)


def forest(max_features: Any, seed: int) -> Any:
    from sklearn.ensemble import RandomForestClassifier

    return RandomForestClassifier(n_estimators=200, max_features=max_features, random_state=seed, n_jobs=1)


def ridge(alpha: float, seed: int) -> Any:
    from sklearn.linear_model import Ridge
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return make_pipeline(StandardScaler(), Ridge(alpha=alpha))


FLOORS = {
    "logistic": Floor(logistic, "C", (0.01, 0.1, 1.0, 10.0)),
    "lda": Floor(lda, "shrinkage", ("auto", 0.1, 0.5, 0.9)),
    "qda": Floor(qda, "reg_param", (0.0, 0.1, 0.3, 0.6, 0.9)),
    "forest": Floor(forest, "max_features", ("sqrt", 0.3)),
    "ridge": Floor(ridge, "alpha", (0.1, 1.0, 10.0, 100.0, 1000.0), ("regression",)),
}
DISPLAY = {"logistic": "logistic regression", "lda": "shrinkage LDA", "qda": "regularized QDA", "forest": "random forest",
           "ridge": "ridge regression"}


class FloorFailed(ValueError):
    """Every value of a floor's grid was refused by scikit-learn (the message names each)."""


@dataclass
class FloorConfig:
    """A graph-free scikit-learn floor; its grid is fixed (see :data:`FLOORS`)."""

    family: str = "logistic"


def predict(estimator: Any, flat: np.ndarray, targets: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """The estimator's predictions for ``rows``, shaped as their targets (scikit-learn returns a
    single target's values flat)."""
    return estimator.predict(flat[rows]).reshape(targets[rows].shape)


def fit_floor(name: str, dataset: Dataset, seed: int, task: Task) -> TrainingResult:
    """Choose the floor's hyperparameter on the validation figure of the task's metric, then
    score every split. ``train_seconds`` covers the whole grid. A value scikit-learn refuses
    (a singular covariance without regularization) is skipped and named in ``chosen``; the
    floor fails only when every value does."""
    floor = FLOORS[name]
    flat = dataset.signals.reshape(dataset.samples, -1).astype(np.float64)  # (samples, nodes * features)
    labels = dataset.labels
    train, val, test = dataset.splits.train, dataset.splits.val, dataset.splits.test
    started, cpu_started = time.perf_counter(), time.process_time()
    best: tuple[float, Any, Any] | None = None
    skipped: dict[str, str] = {}
    for value in floor.grid:
        with warnings.catch_warnings():
            # Collinear classes (QDA without regularization) and slow convergence are scored as
            # they come: the validation split decides.
            warnings.simplefilter("ignore")
            try:
                classifier = floor.make(value, seed).fit(flat[train], labels[train])
                score = task.score_predicted(predict(classifier, flat, labels, val), labels[val])
            except (ValueError, ArithmeticError, np.linalg.LinAlgError) as error:  # scikit-learn's refusals of a value
                skipped[str(value)] = f"{type(error).__name__}: {str(error).splitlines()[0] if str(error) else ''}"
                continue
        if best is None or task.better(score) > task.better(best[0]):
            best = (score, value, classifier)
    train_seconds, train_cpu_seconds = time.perf_counter() - started, time.process_time() - cpu_started
    if best is None:
        reasons = {why: [value for value, same in skipped.items() if same == why] for why in skipped.values()}
        failures = "; ".join(f"{floor.key}={', '.join(values)}: {why}" for why, values in reasons.items())
        raise FloorFailed(f"every value of {name}'s {floor.key} failed ({failures})")
    val_score, value, classifier = best
    predicting = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        predicted = predict(classifier, flat, labels, test)
        train_score = task.score_predicted(predict(classifier, flat, labels, train), labels[train])
    inference = (time.perf_counter() - predicting) / max(len(test) + len(train), 1)
    return TrainingResult(
        train_score=train_score,
        val_score=val_score,
        test_score=task.score_predicted(predicted, labels[test]),
        test_loss=None,
        best_epoch=None,
        epochs_run=None,
        train_seconds=train_seconds,
        train_cpu_seconds=train_cpu_seconds,
        samples_per_second=len(train) * len(floor.grid) / max(train_seconds, 1e-9),
        inference_seconds_per_sample=inference,
        chosen={floor.key: value, **({"skipped": skipped} if skipped else {})},
        test_predictions=predicted,
    )


def _fit(name: str) -> Callable[[Any, Dataset, int, Task], TrainingResult]:
    return lambda arch, dataset, seed, task: fit_floor(name, dataset, seed, task)


for _name in FLOORS:
    FAMILIES.add(
        Family(
            name=_name,
            schema=FloorConfig,
            display=DISPLAY[_name],
            planned_parameters=lambda arch, nodes, features, outputs, head: 0,
            fit=_fit(_name),
            marker="x",
            tasks=FLOORS[_name].tasks,
        )
    )
