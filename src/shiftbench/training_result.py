"""What a fitted model measured: the outcome of the training loop or of a floor's fit."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass
class TrainingResult:
    """What a finished training run measured: ``*_score`` are the task's primary metric
    (accuracy, RMSE) on each split. ``curve`` holds one dict per epoch with keys
    ``epoch, train_loss, train_<metric>, val_loss, val_<metric>, seconds``. Figures that a
    family does not have (the 1-NN floor has no loss and no epochs) are None. ``chosen`` holds the
    setting a self-tuning floor picked on the validation split. ``train_cpu_seconds``: the
    process's CPU time spent training (all its threads), which the machine's load does not inflate. ``test_predictions`` holds the
    prediction for each test sample (a class, or the outputs) (in the order of the split's indices), ``weights`` the
    trained network's final ``state_dict`` as numpy arrays (None for the floors)."""

    train_score: float
    val_score: float | None
    test_score: float
    test_loss: float | None
    best_epoch: int | None
    epochs_run: int | None
    train_seconds: float
    samples_per_second: float
    train_cpu_seconds: float | None = None
    curve: list[dict[str, float]] = field(default_factory=list)
    status: str = "completed"
    resumed_from_epoch: int | None = None
    inference_seconds_per_sample: float | None = None
    chosen: dict[str, Any] | None = None
    test_predictions: np.ndarray | None = None
    weights: dict[str, np.ndarray] | None = None
