"""Tasks: what a job learns and how it is scored. Whole-signal classification is the one task
so far; the loop, records and reports read the loss and metric from here."""

from __future__ import annotations

import torch
from torch import nn

from shiftbench.registry import TASKS, Task


def correct_classes(logits: torch.Tensor, labels: torch.Tensor) -> torch.Tensor:
    """1 where the highest logit is the label, else 0.

    Shapes: logits ``(batch, classes)``, labels ``(batch,)`` -> ``(batch,)``."""
    return (logits.argmax(dim=1) == labels).long()


CLASSIFICATION = TASKS.add(
    Task(
        name="classification",
        loss=nn.functional.cross_entropy,
        correct=correct_classes,
        metric="accuracy",
        higher_is_better=True,
        head="pooled",
        split_rule="stratified",
    )
)
