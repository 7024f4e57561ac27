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
from pathlib import Path

import numpy as np
import torch
from torch import nn

from shiftbench.checkpoints import load_checkpoint, random_states, restore_random_states, save_checkpoint
from shiftbench.config import TrainConfig
from shiftbench.data.dataset import Dataset


class TrainingDiverged(RuntimeError):
    """The loss became NaN or infinite; ``epoch`` is the epoch it happened in."""

    def __init__(self, message: str, epoch: int) -> None:
        super().__init__(message)
        self.epoch = epoch


@dataclass(frozen=True)
class Checkpointing:
    """Where and how often :func:`train` saves checkpoints, and the config hash that a
    checkpoint must carry to be resumed from."""

    folder: Path
    every: int
    config_hash: str


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
    status: str = "completed"
    resumed_from_epoch: int | None = None


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
    checkpointing: Checkpointing | None = None,
) -> TrainingResult:
    """Train ``model`` on ``dataset``'s training split with cross-entropy, stop when validation
    accuracy has not improved for ``config.patience`` epochs (a tie in accuracy with a lower
    validation loss counts as an improvement) or when ``config.max_seconds`` have passed,
    restore the best weights and measure every split.

    With ``checkpointing``, the whole state is saved every ``every`` epochs, and a checkpoint of
    the same config found in its folder is resumed from: the run then ends with the figures an
    uninterrupted run would have (bit for bit on CPU).

    ``model`` must be freshly built after ``seed_everything(seed)`` for runs to be reproducible.

    Raises:
        TrainingDiverged: the training loss of an epoch was NaN or infinite.
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
    first_epoch, resumed_from, spent_before = 1, None, 0.0
    saved = load_checkpoint(checkpointing.folder, checkpointing.config_hash) if checkpointing else None
    if saved is not None:
        model.load_state_dict(saved["model"])
        optimizer.load_state_dict(saved["optimizer"])
        restore_random_states(saved["random"], order_generator)
        best, best_state, best_epoch = tuple(saved["best"]), saved["best_state"], saved["best_epoch"]
        curve, spent_before = saved["curve"], saved["train_seconds"]
        first_epoch = resumed_from = saved["epoch"] + 1
        if saved["epoch"] - best_epoch >= config.patience:  # it had stopped early at that epoch
            first_epoch = config.epochs + 1
    started = time.perf_counter()
    status = "completed"

    def elapsed() -> float:
        return spent_before + time.perf_counter() - started

    for epoch in range(first_epoch, config.epochs + 1):
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
            if config.max_seconds is not None and elapsed() > config.max_seconds:
                status = "timed_out"
                break
        if status == "timed_out":
            break
        train_loss = loss_sum.item() / len(train_y)
        if not math.isfinite(train_loss):
            raise TrainingDiverged(f"the training loss became {train_loss} in epoch {epoch}", epoch)
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
        improved = (val_accuracy, -val_loss) > (best[0], -best[1])
        if improved:
            best, best_state, best_epoch = (val_accuracy, val_loss), copy.deepcopy(model.state_dict()), epoch
        if checkpointing is not None and checkpointing.every and epoch % checkpointing.every == 0:
            save_checkpoint(checkpointing.folder, {
                "config_hash": checkpointing.config_hash, "epoch": epoch, "model": model.state_dict(),
                "optimizer": optimizer.state_dict(), "random": random_states(order_generator),
                "best": list(best), "best_state": best_state, "best_epoch": best_epoch, "curve": curve,
                "train_seconds": elapsed(),
            })
        if on_epoch is not None:
            on_epoch(row)
        if not improved and epoch - best_epoch >= config.patience:
            break
    train_seconds = elapsed()

    model.load_state_dict(best_state)
    _, train_accuracy = evaluate(model, train_x, train_y, config.batch_size)
    test_loss, test_accuracy = evaluate(model, signals[split["test"]], labels[split["test"]], config.batch_size)
    return TrainingResult(
        train_accuracy=train_accuracy,
        val_accuracy=best[0] if curve else evaluate(model, val_x, val_y, config.batch_size)[1],
        test_accuracy=test_accuracy,
        test_loss=test_loss,
        best_epoch=best_epoch,
        epochs_run=len(curve),
        train_seconds=train_seconds,
        samples_per_second=len(train_y) * len(curve) / max(train_seconds, 1e-9),
        curve=curve,
        status=status,
        resumed_from_epoch=resumed_from,
    )
