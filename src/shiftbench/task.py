"""Tasks: what a job learns and how it is scored. Whole-signal classification is the one task
so far; the loop, records and reports read the loss, metric and judgement from here."""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import torch
from torch import nn

from shiftbench.registry import TASKS, Task


def predicted_classes(logits: torch.Tensor) -> torch.Tensor:
    """The class of the highest logit. Shapes: ``(batch, classes) -> (batch,)``."""
    return logits.argmax(dim=1)


def correct_classes(logits: torch.Tensor, labels: torch.Tensor) -> torch.Tensor:
    """1 where the highest logit is the label, else 0.

    Shapes: logits ``(batch, classes)``, labels ``(batch,)`` -> ``(batch,)``."""
    return (predicted_classes(logits) == labels).long()


def chance_accuracy(train_labels: np.ndarray, labels: np.ndarray) -> float:
    """The accuracy on ``labels`` of always predicting the training split's most frequent class
    (the majority-class rate: what a model that learned nothing from the signals scores)."""
    majority = np.bincount(train_labels).argmax()
    return float((labels == majority).mean())


def judge_classification(
    labels: np.ndarray, predicted: np.ndarray, train_labels: np.ndarray, curve: list[dict[str, float]]
) -> dict[str, Any]:
    """Per-class figures of the test predictions (scikit-learn's balanced accuracy, macro F1 and
    confusion matrix, rows the true classes ``0..C-1``), the chance level, and flags:
    ``at_chance`` (test accuracy at or below the majority-class rate) and ``loss_never_fell``
    (no epoch's training loss below the first epoch's)."""
    from sklearn.metrics import balanced_accuracy_score, confusion_matrix, f1_score

    classes = np.arange(max(int(labels.max()), int(predicted.max()), int(train_labels.max())) + 1)
    chance = chance_accuracy(train_labels, labels)
    flags = []
    if float((predicted == labels).mean()) <= chance:
        flags.append("at_chance")
    losses = [row["train_loss"] for row in curve]
    if len(losses) >= 2 and min(losses[1:]) >= losses[0]:
        flags.append("loss_never_fell")
    with warnings.catch_warnings():  # a class never predicted is scored as it comes
        warnings.simplefilter("ignore")
        balanced = float(balanced_accuracy_score(labels, predicted))
    return {
        "chance_accuracy": chance,
        "balanced_accuracy": balanced,
        "macro_f1": float(f1_score(labels, predicted, labels=classes, average="macro", zero_division=0)),
        "confusion_matrix": confusion_matrix(labels, predicted, labels=classes).tolist(),
        "flags": flags,
    }


CLASSIFICATION = TASKS.add(
    Task(
        name="classification",
        loss=nn.functional.cross_entropy,
        correct=correct_classes,
        predict=predicted_classes,
        judge=judge_classification,
        metric="accuracy",
        higher_is_better=True,
        head="pooled",
        split_rule="stratified",
    )
)
