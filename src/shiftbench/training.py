"""The training loop: mini-batches, early stopping, the kept weights (best on validation by default) restored.

Everything random (initial weights, dropout, batch order) is drawn after :func:`seed_everything`,
so on CPU the same model, data, config and seed give identical figures.
"""

from __future__ import annotations

import copy
import math
import random
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
import torch
from torch import nn

from shiftbench.checkpoints import (
    load_checkpoint, random_states, restore_random_states, save_checkpoint, set_checkpoint_aside,
)
from shiftbench.config import TrainConfig, batch_size_for
from shiftbench.data.dataset import Dataset
from shiftbench.registry import Task
from shiftbench.runtime import raise_if_interrupted
from shiftbench.task import CLASSIFICATION
from shiftbench.training_result import TrainingResult

__all__ = ["Checkpointing", "TrainingDiverged", "TrainingResult", "seed_everything", "train"]


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


def seed_everything(seed: int) -> None:
    """Seed python's, numpy's and torch's generators."""
    random.seed(seed)
    np.random.seed(seed)
    torch.manual_seed(seed)


def make_schedule(optimizer: torch.optim.Optimizer, config: TrainConfig) -> torch.optim.lr_scheduler.ReduceLROnPlateau | None:
    """The learning rate times ``plateau_factor`` after ``plateau_patience`` epochs without a
    lower training loss, never below ``min_lr``; None for a fixed learning rate."""
    if config.plateau_patience == 0:
        return None
    return torch.optim.lr_scheduler.ReduceLROnPlateau(
        optimizer, factor=config.plateau_factor, patience=config.plateau_patience, min_lr=config.min_lr
    )


def make_optimizer(model: nn.Module, config: TrainConfig) -> torch.optim.Optimizer:
    if config.optimizer == "adam":
        return torch.optim.Adam(model.parameters(), lr=config.lr, weight_decay=config.weight_decay)
    if config.optimizer == "adadelta":
        return torch.optim.Adadelta(model.parameters(), lr=config.lr, weight_decay=config.weight_decay)
    return torch.optim.SGD(
        model.parameters(), lr=config.lr, momentum=config.momentum, weight_decay=config.weight_decay
    )


@torch.no_grad()
def outputs_of(model: nn.Module, signals: torch.Tensor, batch_size: int) -> torch.Tensor:
    """``model``'s outputs in eval mode, ``batch_size`` samples at a time.

    Shapes: signals ``(samples, nodes, features)`` -> ``(samples, outputs)``."""
    model.eval()
    return torch.cat([model(signals[start : start + batch_size]) for start in range(0, len(signals), batch_size)])


def scores(outputs: torch.Tensor, targets: torch.Tensor, task: Task = CLASSIFICATION) -> tuple[float, float]:
    """Mean loss and the task's primary metric of ``outputs`` against ``targets``.

    Shapes: outputs ``(samples, classes)`` and targets ``(samples,)`` for a whole-signal task;
    both ``(samples, nodes, outputs)`` for a node task."""
    return task.loss(outputs, targets).item(), task.score(outputs, targets)


def evaluate(
    model: nn.Module, signals: torch.Tensor, labels: torch.Tensor, batch_size: int, task: Task = CLASSIFICATION
) -> tuple[float, float]:
    """Mean loss and the task's primary metric of ``model`` in eval mode.

    Args:
        signals: ``(samples, nodes, features)``; labels: the task's targets for them.
    """
    return scores(outputs_of(model, signals, batch_size), labels, task)


# What each ``train.keep`` ranks an epoch by (larger is better) for a task; ``last`` ranks later
# epochs higher.
CRITERIA: dict[str, Callable[[dict[str, Any], Task], tuple[float, ...]]] = {
    "best_val": lambda row, task: (task.better(row[f"val_{task.metric}"]), -row["val_loss"]),
    "lowest_train_loss": lambda row, task: (-row["train_loss"],),
    "last": lambda row, task: (row["epoch"],),
}


@dataclass
class EarlyStopping:
    """The best epoch so far by the criterion ``keep`` names (see :data:`CRITERIA`; for
    ``best_val``, a better validation figure of the task's metric, ties broken by lower validation
    loss) and its weights. Training stops after ``patience`` epochs without improvement
    (``patience`` 0: never)."""

    patience: int
    keep: str = "best_val"
    task: Task = CLASSIFICATION
    best: tuple[float, ...] = ()
    best_state: dict[str, Any] = field(default_factory=dict)
    best_epoch: int = 0

    def update(self, row: dict[str, Any], model: nn.Module) -> bool:
        """Note an epoch's curve row; True when it improves on the best."""
        rank = CRITERIA[self.keep](row, self.task)
        improved = not self.best or rank > self.best
        if improved:
            self.best, self.best_state, self.best_epoch = rank, copy.deepcopy(model.state_dict()), int(row["epoch"])
        return improved

    def should_stop(self, epoch: int) -> bool:
        return self.patience > 0 and epoch - self.best_epoch >= self.patience


@dataclass
class LoopState:
    """Everything the loop carries from epoch to epoch, and what a checkpoint saves."""

    stopping: EarlyStopping
    order_generator: torch.Generator
    schedule: torch.optim.lr_scheduler.ReduceLROnPlateau | None = None
    curve: list[dict[str, float]] = field(default_factory=list)
    first_epoch: int = 1
    resumed_from: int | None = None
    spent_before: float = 0.0
    cpu_before: float = 0.0


def resume(
    state: LoopState, model: nn.Module, optimizer: torch.optim.Optimizer, config: TrainConfig,
    checkpointing: Checkpointing | None,
) -> None:
    """Load the checkpoint of this config, if there is one, into the model, optimizer and state.
    A checkpoint that loads but does not fit (missing keys, other shapes: as an upgrade of the
    model's code could leave) is set aside, and everything stays as a fresh start has it."""
    saved = load_checkpoint(checkpointing.folder, checkpointing.config_hash) if checkpointing else None
    if saved is None:
        return
    fresh = (copy.deepcopy(model.state_dict()), copy.deepcopy(optimizer.state_dict()), random_states(state.order_generator))
    try:
        model.load_state_dict(saved["model"])
        optimizer.load_state_dict(saved["optimizer"])
        if state.schedule is not None:
            state.schedule.load_state_dict(saved["schedule"])
        restore_random_states(saved["random"], state.order_generator)
        best = (tuple(saved["best"]), saved["best_state"], int(saved["best_epoch"]))
        curve, spent, epoch = list(saved["curve"]), float(saved["train_seconds"]), int(saved["epoch"])
        model.load_state_dict(best[1])  # the best weights must fit too; the current ones go back next
        model.load_state_dict(saved["model"])
    except (KeyError, RuntimeError, ValueError, TypeError, IndexError) as error:
        model.load_state_dict(fresh[0])
        optimizer.load_state_dict(fresh[1])
        restore_random_states(fresh[2], state.order_generator)
        set_checkpoint_aside(checkpointing.folder, f"{type(error).__name__}: {str(error).splitlines()[0][:200]}")
        return
    stopping = state.stopping
    stopping.best, stopping.best_state, stopping.best_epoch = best
    state.curve, state.spent_before = curve, spent
    state.cpu_before = float(saved.get("train_cpu_seconds", 0.0))  # absent from older checkpoints
    state.first_epoch = state.resumed_from = epoch + 1
    if stopping.should_stop(epoch):  # it had stopped early at that epoch
        state.first_epoch = config.epochs + 1


def checkpoint(
    checkpointing: Checkpointing, epoch: int, model: nn.Module, optimizer: torch.optim.Optimizer,
    state: LoopState, seconds: float, cpu_seconds: float,
) -> None:
    """Save the whole state after ``epoch`` (``seconds`` of wall time and ``cpu_seconds`` of
    this process's CPU time spent training so far)."""
    stopping = state.stopping
    save_checkpoint(checkpointing.folder, {
        "config_hash": checkpointing.config_hash, "epoch": epoch, "model": model.state_dict(),
        "optimizer": optimizer.state_dict(), "random": random_states(state.order_generator),
        "best": list(stopping.best), "best_state": stopping.best_state, "best_epoch": stopping.best_epoch,
        "curve": state.curve, "train_seconds": seconds, "train_cpu_seconds": cpu_seconds,
        "schedule": state.schedule.state_dict() if state.schedule is not None else None,
    })


def run_epoch(
    model: nn.Module, optimizer: torch.optim.Optimizer, train_x: torch.Tensor, train_y: torch.Tensor,
    config: TrainConfig, order_generator: torch.Generator, task: Task, out_of_time: Callable[[], bool],
) -> tuple[float, float, bool]:
    """One pass over the training split in shuffled mini-batches.

    Returns:
        The epoch's mean loss and metric, and whether time ran out before its end.
    """
    model.train()
    device = train_x.device
    # Sums stay on the device during the epoch: one read at its end, not one per step.
    loss_sum = torch.zeros((), dtype=torch.float64, device=device)
    tallied = torch.zeros(2, dtype=torch.float64, device=device)
    for batch in torch.randperm(len(train_y), generator=order_generator).split(config.batch_size):
        batch = batch.to(device)
        outputs = model(train_x[batch])
        loss = task.loss(outputs, train_y[batch])
        optimizer.zero_grad(set_to_none=True)
        loss.backward()
        optimizer.step()
        loss_sum += loss.detach().double() * len(batch)
        tallied += torch.stack(task.tally(outputs.detach(), train_y[batch]))
        if out_of_time():
            return float("nan"), float("nan"), True
    return loss_sum.item() / len(train_y), task.finish(tallied[0], tallied[1]), False


def train(
    model: nn.Module,
    dataset: Dataset,
    config: TrainConfig,
    seed: int,
    device: str = "cpu",
    on_epoch: Callable[[dict[str, float]], None] | None = None,
    checkpointing: Checkpointing | None = None,
    task: Task = CLASSIFICATION,
) -> TrainingResult:
    """Train ``model`` on ``dataset``'s training split with the task's loss, stop when the
    criterion ``config.keep`` names (the validation figure of the task's metric by default) has not improved for
    ``config.patience`` epochs (see :class:`EarlyStopping`) or when ``config.max_seconds`` have
    passed, restore the kept weights and measure every split. Without a validation split its
    figures are None.

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
    config = replace(config, batch_size=batch_size_for(config, len(train_y)), batch_fraction=None)
    optimizer = make_optimizer(model, config)
    state = LoopState(
        EarlyStopping(config.patience, config.keep, task, best_state=copy.deepcopy(model.state_dict())),
        torch.Generator().manual_seed(seed),
        make_schedule(optimizer, config),
    )
    resume(state, model, optimizer, config, checkpointing)
    started, cpu_started = time.perf_counter(), time.process_time()

    def elapsed() -> float:
        return state.spent_before + time.perf_counter() - started

    def cpu_elapsed() -> float:
        # The process's CPU time over every thread it computes on: unlike wall time, it does not
        # grow when other processes load the machine.
        return state.cpu_before + time.process_time() - cpu_started

    def out_of_time() -> bool:
        return config.max_seconds is not None and elapsed() > config.max_seconds

    status = "completed"
    for epoch in range(state.first_epoch, config.epochs + 1):
        raise_if_interrupted()
        epoch_started = time.perf_counter()
        train_loss, train_metric, timed_out = run_epoch(
            model, optimizer, train_x, train_y, config, state.order_generator, task, out_of_time
        )
        if timed_out:
            status = "timed_out"
            break
        if not math.isfinite(train_loss):
            raise TrainingDiverged(f"the training loss became {train_loss} in epoch {epoch}", epoch)
        val_loss, val_metric = evaluate(model, val_x, val_y, config.batch_size, task) if len(val_y) else (None, None)
        if state.schedule is not None:
            state.schedule.step(train_loss)
        row = {
            "epoch": epoch,
            "train_loss": train_loss,
            f"train_{task.metric}": train_metric,
            "val_loss": val_loss,
            f"val_{task.metric}": val_metric,
            "seconds": time.perf_counter() - epoch_started,
        }
        state.curve.append(row)
        improved = state.stopping.update(row, model)
        if checkpointing is not None and checkpointing.every and epoch % checkpointing.every == 0:
            checkpoint(checkpointing, epoch, model, optimizer, state, elapsed(), cpu_elapsed())
        if on_epoch is not None:
            on_epoch(row)
        if not improved and state.stopping.should_stop(epoch):
            break
    return final_result(model, signals, labels, split, config, task, state, elapsed(), status, cpu_elapsed())


def final_result(
    model: nn.Module, signals: torch.Tensor, labels: torch.Tensor, split: dict[str, torch.Tensor],
    config: TrainConfig, task: Task, state: LoopState, train_seconds: float, status: str, train_cpu_seconds: float,
) -> TrainingResult:
    """Restore the kept weights and measure the training and test splits (and the time a test
    sample takes to predict); the validation figure is the kept epoch's (None without a
    validation split)."""
    model.load_state_dict(state.stopping.best_state)
    train_x, train_y = signals[split["train"]], labels[split["train"]]
    _, train_score = evaluate(model, train_x, train_y, config.batch_size, task)
    predicting = time.perf_counter()
    test_outputs = outputs_of(model, signals[split["test"]], config.batch_size)
    inference = (time.perf_counter() - predicting) / max(len(split["test"]), 1)
    test_loss, test_score = scores(test_outputs, labels[split["test"]], task)
    curve = state.curve
    if not len(split["val"]):
        val_score = None
    elif curve:
        val_score = curve[state.stopping.best_epoch - 1][f"val_{task.metric}"]
    else:
        val_score = evaluate(model, signals[split["val"]], labels[split["val"]], config.batch_size, task)[1]
    return TrainingResult(
        train_score=train_score,
        val_score=val_score,
        test_score=test_score,
        test_loss=test_loss,
        best_epoch=state.stopping.best_epoch,
        epochs_run=len(curve),
        train_seconds=train_seconds,
        train_cpu_seconds=train_cpu_seconds,
        samples_per_second=len(train_y) * len(curve) / max(train_seconds, 1e-9),
        curve=curve,
        status=status,
        resumed_from_epoch=state.resumed_from,
        inference_seconds_per_sample=inference,
        test_predictions=task.predict(test_outputs).cpu().numpy(),
        weights={name: tensor.detach().cpu().numpy() for name, tensor in model.state_dict().items()},
    )
