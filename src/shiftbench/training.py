"""The training loop: mini-batches, early stopping on validation accuracy, best weights restored.

Everything random (initial weights, dropout, batch order) is drawn after :func:`seed_everything`,
so on CPU the same model, data, config and seed give identical figures.
"""

from __future__ import annotations

import copy
import math
import random
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import torch
from torch import nn

from shiftbench.config import TrainConfig
from shiftbench.data.dataset import Dataset


class TrainingDiverged(RuntimeError):
    """The loss became NaN or infinite."""


@dataclass
class TrainingResult:
    """What a finished training run measured. ``curve`` holds one dict per epoch with keys
    ``epoch, train_loss, train_accuracy, val_loss, val_accuracy, seconds``. Figures that a
    family does not have (the 1-NN floor has no loss and no epochs) are None."""

    train_accuracy: float
    val_accuracy: float
    test_accuracy: float
    test_loss: float | None
    best_epoch: int | None
    epochs_run: int | None
    train_seconds: float
    samples_per_second: float
    curve: list[dict[str, float]] = field(default_factory=list)


def seed_everything(seed: int) -> None:
    """Seed python's, numpy's and torch's generators."""
    random.seed(seed)
    np.random.seed(seed)
    torch.manual_seed(seed)


def make_optimizer(model: nn.Module, config: TrainConfig) -> torch.optim.Optimizer:
    if config.optimizer == "adam":
        return torch.optim.Adam(model.parameters(), lr=config.lr, weight_decay=config.weight_decay)
    return torch.optim.SGD(
        model.parameters(), lr=config.lr, momentum=config.momentum, weight_decay=config.weight_decay
    )


@torch.no_grad()
def evaluate(model: nn.Module, signals: torch.Tensor, labels: torch.Tensor, batch_size: int) -> tuple[float, float]:
    """Mean cross-entropy and accuracy of ``model`` in eval mode.

    Args:
        signals: ``(samples, nodes, features)``; labels: ``(samples,)``.
    """
    model.eval()
    loss_sum, correct = 0.0, 0
    for start in range(0, len(labels), batch_size):
        logits = model(signals[start : start + batch_size])
        target = labels[start : start + batch_size]
        loss_sum += nn.functional.cross_entropy(logits, target, reduction="sum").item()
        correct += int((logits.argmax(dim=1) == target).sum())
    return loss_sum / len(labels), correct / len(labels)


def train(
    model: nn.Module,
    dataset: Dataset,
    config: TrainConfig,
    seed: int,
    device: str = "cpu",
    on_epoch: Callable[[dict[str, float]], None] | None = None,
) -> TrainingResult:
    """Train ``model`` on ``dataset``'s training split with cross-entropy, stop when validation
    accuracy has not improved for ``config.patience`` epochs (a tie in accuracy with a lower
    validation loss counts as an improvement), restore the best weights and measure every split.

    ``model`` must be freshly built after ``seed_everything(seed)`` for runs to be reproducible.
    """
    signals = torch.from_numpy(dataset.signals).to(device)
    labels = torch.from_numpy(dataset.labels).to(device)
    model.to(device)
    split = {name: torch.from_numpy(getattr(dataset.splits, name)).to(device) for name in ("train", "val", "test")}
    train_x, train_y = signals[split["train"]], labels[split["train"]]
    val_x, val_y = signals[split["val"]], labels[split["val"]]
    optimizer = make_optimizer(model, config)
    order_generator = torch.Generator().manual_seed(seed)

    best = (-1.0, float("inf"))
    best_state, best_epoch = copy.deepcopy(model.state_dict()), 0
    curve: list[dict[str, float]] = []
    started = time.perf_counter()
    for epoch in range(1, config.epochs + 1):
        model.train()
        epoch_started = time.perf_counter()
        # Sums stay on the device during the epoch: one read at its end, not one per step.
        loss_sum = torch.zeros((), dtype=torch.float64, device=device)
        correct = torch.zeros((), dtype=torch.long, device=device)
        for batch in torch.randperm(len(train_y), generator=order_generator).split(config.batch_size):
            batch = batch.to(device)
            logits = model(train_x[batch])
            loss = nn.functional.cross_entropy(logits, train_y[batch])
            optimizer.zero_grad(set_to_none=True)
            loss.backward()
            optimizer.step()
            loss_sum += loss.detach().double() * len(batch)
            correct += (logits.argmax(dim=1) == train_y[batch]).sum()
        train_loss = loss_sum.item() / len(train_y)
        if not math.isfinite(train_loss):
            raise TrainingDiverged(f"the training loss became {train_loss} in epoch {epoch}")
        val_loss, val_accuracy = evaluate(model, val_x, val_y, config.batch_size)
        row = {
            "epoch": epoch,
            "train_loss": train_loss,
            "train_accuracy": correct.item() / len(train_y),
            "val_loss": val_loss,
            "val_accuracy": val_accuracy,
            "seconds": time.perf_counter() - epoch_started,
        }
        curve.append(row)
        if on_epoch is not None:
            on_epoch(row)
        if (val_accuracy, -val_loss) > (best[0], -best[1]):
            best, best_state, best_epoch = (val_accuracy, val_loss), copy.deepcopy(model.state_dict()), epoch
        elif epoch - best_epoch >= config.patience:
            break
    train_seconds = time.perf_counter() - started

    model.load_state_dict(best_state)
    _, train_accuracy = evaluate(model, train_x, train_y, config.batch_size)
    test_loss, test_accuracy = evaluate(model, signals[split["test"]], labels[split["test"]], config.batch_size)
    return TrainingResult(
        train_accuracy=train_accuracy,
        val_accuracy=best[0],
        test_accuracy=test_accuracy,
        test_loss=test_loss,
        best_epoch=best_epoch,
        epochs_run=len(curve),
        train_seconds=train_seconds,
        samples_per_second=len(train_y) * len(curve) / max(train_seconds, 1e-9),
        curve=curve,
    )
