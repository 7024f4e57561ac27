"""Tasks: what a job learns and how it is scored. The loop, records and reports read the loss,
the primary metric (its name and direction) and the judgement of a run from here.

- ``classification``: one class per signal; cross-entropy, accuracy.
- ``regression``: one or more values per signal; mean squared error, RMSE.
- ``source_localization``: the one node of each signal where something started (a leak);
  every node scores itself, a softmax over the nodes, cross-entropy, accuracy.
- ``node_classification``: a class on every node (-1 where a node is not a target);
  cross-entropy over the scored nodes, accuracy over them.
- ``node_regression``: a value (or several) on every node; mean squared error over the scored
  entries, RMSE. Entries that are not targets (a sensor that is not masked, an unobserved node)
  hold NaN and are left out of the loss and of every figure (of ``regression``'s too).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
import torch
from torch import nn

from shiftbench.registry import TASKS, Task


def predicted_classes(logits: torch.Tensor) -> torch.Tensor:
    """The class of the highest logit. Shapes: ``(batch, classes) -> (batch,)``."""
    return logits.argmax(dim=1)


def tally_correct(logits: torch.Tensor, labels: torch.Tensor) -> tuple[torch.Tensor, torch.Tensor]:
    """``(correct, samples)``: how many highest logits are the label, out of how many.

    Shapes: logits ``(batch, classes)``, labels ``(batch,)`` -> two float64 scalars."""
    correct = (predicted_classes(logits) == labels).sum().double()
    return correct, torch.tensor(float(len(labels)), dtype=torch.float64, device=logits.device)


def share(total: torch.Tensor, count: torch.Tensor) -> float:
    """``total / count``: accuracy from summed tallies."""
    return float(total / count)


def share_equal(predicted: np.ndarray, labels: np.ndarray) -> float:
    """Accuracy of predicted classes over the entries whose label is not -1 (every entry of
    class labels per signal). Shapes: alike, ``(samples,)`` or ``(samples, nodes)``."""
    scored = labels >= 0
    return float((predicted[scored] == labels[scored]).mean())


def root_mean_squared(predicted: np.ndarray, targets: np.ndarray) -> float:
    """RMSE over the entries where ``targets`` is not NaN. Shapes: alike, any."""
    scored = ~np.isnan(targets)
    return float(np.sqrt(np.mean((predicted[scored] - targets[scored]) ** 2)))


def masked_squared_error(outputs: torch.Tensor, targets: torch.Tensor) -> torch.Tensor:
    """``mean over scored entries of (outputs - targets)^2``, the entries where ``targets`` is
    not NaN. Shapes: ``(batch, outputs)`` or ``(batch, nodes, outputs)``, both alike -> scalar."""
    scored = ~torch.isnan(targets)
    return ((outputs - targets)[scored] ** 2).mean()


def tally_squared_error(outputs: torch.Tensor, targets: torch.Tensor) -> tuple[torch.Tensor, torch.Tensor]:
    """``(sum of squared errors, scored entries)`` over the entries where ``targets`` is not NaN.

    Shapes: ``(batch, outputs)`` or ``(batch, nodes, outputs)``, both alike -> two float64 scalars."""
    scored = ~torch.isnan(targets)
    errors = (outputs - targets)[scored].double()
    return (errors**2).sum(), scored.sum().double()


def root_mean(total: torch.Tensor, count: torch.Tensor) -> float:
    """``sqrt(total / count)``: RMSE from summed squared errors."""
    return float(torch.sqrt(total / count))


def are_classes(targets: np.ndarray, nodes: int) -> bool:
    """Class codes: ``(samples,)`` integers."""
    return targets.ndim == 1 and targets.dtype.kind in "iu"


def are_nodes(targets: np.ndarray, nodes: int) -> bool:
    """Node indices: ``(samples,)`` integers in ``0..nodes - 1``."""
    return are_classes(targets, nodes) and (len(targets) == 0 or 0 <= targets.min() <= targets.max() < nodes)


def are_node_classes(targets: np.ndarray, nodes: int) -> bool:
    """Classes on every node: ``(samples, nodes)`` integers, -1 where not a target."""
    return targets.ndim == 2 and targets.shape[1] == nodes and targets.dtype.kind in "iu"


def are_values(targets: np.ndarray, nodes: int) -> bool:
    """Values per signal: ``(samples, outputs)`` floats."""
    return targets.ndim == 2 and targets.dtype.kind == "f"


def are_node_values(targets: np.ndarray, nodes: int) -> bool:
    """Values on every node: ``(samples, nodes, outputs)`` floats."""
    return targets.ndim == 3 and targets.shape[1] == nodes and targets.dtype.kind == "f"


def node_scores(outputs: torch.Tensor) -> torch.Tensor:
    """Each node's score as the logit of choosing it. Shapes: ``(batch, nodes, 1) -> (batch, nodes)``."""
    return outputs[..., 0]


def node_cross_entropy(outputs: torch.Tensor, sources: torch.Tensor) -> torch.Tensor:
    """Cross-entropy of the softmax over the nodes' scores against the source node.

    Shapes: outputs ``(batch, nodes, 1)``, sources ``(batch,)`` node indices -> scalar."""
    return nn.functional.cross_entropy(node_scores(outputs), sources)


def tally_located(outputs: torch.Tensor, sources: torch.Tensor) -> tuple[torch.Tensor, torch.Tensor]:
    """``(correct, samples)``: how many highest-scoring nodes are the source.

    Shapes: outputs ``(batch, nodes, 1)``, sources ``(batch,)`` -> two float64 scalars."""
    return tally_correct(node_scores(outputs), sources)


def located_nodes(outputs: torch.Tensor) -> torch.Tensor:
    """The highest-scoring node. Shapes: ``(batch, nodes, 1) -> (batch,)``."""
    return predicted_classes(node_scores(outputs))


def chance_accuracy(train_labels: np.ndarray, labels: np.ndarray) -> float:
    """The accuracy on ``labels`` of always predicting the training split's most frequent class
    (the majority-class rate: what a model that learned nothing from the signals scores)."""
    majority = np.bincount(train_labels).argmax()
    return float((labels == majority).mean())


def judge_classification(
    labels: np.ndarray, predicted: np.ndarray, train_labels: np.ndarray, curve: list[dict[str, float]]
) -> dict[str, Any]:
    """Per-class figures of the test predictions (scikit-learn's balanced accuracy, macro F1,
    confusion matrix, rows the true classes ``0..C-1``, and each class's precision, recall, F1
    and support), the chance level, and flags:
    ``at_chance`` (test accuracy at or below the majority-class rate) and ``loss_never_fell``
    (no epoch's training loss below the first epoch's)."""
    from sklearn.metrics import balanced_accuracy_score, confusion_matrix, f1_score, precision_recall_fscore_support

    classes = np.arange(max(int(labels.max()), int(predicted.max()), int(train_labels.max())) + 1)
    chance = chance_accuracy(train_labels, labels)
    flags = []
    if float((predicted == labels).mean()) <= chance:
        flags.append("at_chance")
    if loss_never_fell(curve):
        flags.append("loss_never_fell")
    with warnings.catch_warnings():  # a class never predicted is scored as it comes
        warnings.simplefilter("ignore")
        balanced = float(balanced_accuracy_score(labels, predicted))
    precision, recall, f1, support = precision_recall_fscore_support(labels, predicted, labels=classes, zero_division=0)
    return {
        "chance_accuracy": chance,
        "balanced_accuracy": balanced,
        "macro_f1": float(f1_score(labels, predicted, labels=classes, average="macro", zero_division=0)),
        "confusion_matrix": confusion_matrix(labels, predicted, labels=classes).tolist(),
        "per_class": {"precision": precision.tolist(), "recall": recall.tolist(), "f1": f1.tolist(),
                      "support": support.tolist()},
        "flags": flags,
    }


def loss_never_fell(curve: list[dict[str, float]]) -> bool:
    """No epoch's training loss below the first epoch's (with two epochs or more)."""
    losses = [row["train_loss"] for row in curve]
    return len(losses) >= 2 and min(losses[1:]) >= losses[0]


def judge_regression(
    targets: np.ndarray, predicted: np.ndarray, train_targets: np.ndarray, curve: list[dict[str, float]]
) -> dict[str, Any]:
    """Error figures of the test predictions on the scored entries (scikit-learn's MAE and R^2
    over all scored entries pooled), the chance level ``chance_rmse`` (the RMSE of predicting
    each target's training mean, per node for node targets: the mean-prediction floor) and
    flags: ``at_chance`` (test RMSE at or above that floor) and ``loss_never_fell``.

    Shapes: targets and predicted ``(samples, outputs)`` or ``(samples, nodes, outputs)``;
    train_targets the same for the training samples; NaN targets are not scored."""
    from sklearn.metrics import mean_absolute_error, mean_squared_error, r2_score

    scored = ~np.isnan(targets)
    truth, guess = targets[scored], predicted[scored]
    with warnings.catch_warnings():  # a node never scored in training takes the overall mean
        warnings.simplefilter("ignore", RuntimeWarning)
        means = np.nanmean(train_targets, axis=0)
    means = np.where(np.isnan(means), np.nanmean(train_targets), means)
    floor = np.broadcast_to(means, targets.shape)[scored]
    rmse = float(np.sqrt(mean_squared_error(truth, guess)))
    chance = float(np.sqrt(mean_squared_error(truth, floor)))
    flags = ["at_chance"] * (rmse >= chance) + ["loss_never_fell"] * loss_never_fell(curve)
    return {
        "chance_rmse": chance,
        "test_mae": float(mean_absolute_error(truth, guess)),
        "test_r2": float(r2_score(truth, guess)),
        "flags": flags,
    }


CLASSIFICATION = TASKS.add(
    Task(
        name="classification",
        loss=nn.functional.cross_entropy,
        tally=tally_correct,
        finish=share,
        predict=predicted_classes,
        score_predicted=share_equal,
        judge=judge_classification,
        metric="accuracy",
        higher_is_better=True,
        head="pooled",
        targets="class labels (samples,)",
        fits=are_classes,
    )
)



def regression_task(name: str, head: str, targets: str, fits: Callable[..., bool]) -> Task:
    """A task of values to predict: masked mean squared error, RMSE, the outputs themselves as
    predictions; ``head`` says whether per signal or on every node."""
    return Task(
        name=name, loss=masked_squared_error, tally=tally_squared_error, finish=root_mean,
        predict=lambda outputs: outputs, score_predicted=root_mean_squared, judge=judge_regression,
        metric="rmse", higher_is_better=False, head=head, targets=targets, fits=fits,
    )


REGRESSION = TASKS.add(regression_task("regression", "pooled", "values (samples, outputs)", are_values))


def node_class_cross_entropy(outputs: torch.Tensor, labels: torch.Tensor) -> torch.Tensor:
    """Cross-entropy over the scored nodes (labels -1 are not targets).

    Shapes: outputs ``(batch, nodes, classes)``, labels ``(batch, nodes)`` -> scalar."""
    return nn.functional.cross_entropy(outputs.flatten(0, 1), labels.flatten(), ignore_index=-1)


def tally_node_classes(outputs: torch.Tensor, labels: torch.Tensor) -> tuple[torch.Tensor, torch.Tensor]:
    """``(correct, scored nodes)`` over the nodes whose label is not -1.

    Shapes: outputs ``(batch, nodes, classes)``, labels ``(batch, nodes)`` -> two float64 scalars."""
    scored = labels >= 0
    correct = ((outputs.argmax(dim=2) == labels) & scored).sum().double()
    return correct, scored.sum().double()


def judge_node_classification(
    labels: np.ndarray, predicted: np.ndarray, train_labels: np.ndarray, curve: list[dict[str, float]]
) -> dict[str, Any]:
    """Over the scored nodes: scikit-learn's balanced accuracy and macro F1, the chance level
    (always the most frequent class of the training split's scored nodes) and the flags
    ``at_chance`` and ``loss_never_fell``.

    Shapes: labels and predicted ``(samples, nodes)``, train_labels ``(train samples, nodes)``."""
    from sklearn.metrics import balanced_accuracy_score, f1_score

    scored = labels >= 0
    truth, guess = labels[scored], predicted[scored]
    chance = chance_accuracy(train_labels[train_labels >= 0], truth)
    flags = ["at_chance"] * (share_equal(guess, truth) <= chance) + ["loss_never_fell"] * loss_never_fell(curve)
    with warnings.catch_warnings():  # a class never predicted is scored as it comes
        warnings.simplefilter("ignore")
        balanced = float(balanced_accuracy_score(truth, guess))
    return {"chance_accuracy": chance, "balanced_accuracy": balanced,
            "macro_f1": float(f1_score(truth, guess, average="macro", zero_division=0)), "flags": flags}


NODE_CLASSIFICATION = TASKS.add(
    Task(
        name="node_classification",
        loss=node_class_cross_entropy,
        tally=tally_node_classes,
        finish=share,
        predict=lambda outputs: outputs.argmax(dim=2),
        score_predicted=share_equal,
        judge=judge_node_classification,
        metric="accuracy",
        higher_is_better=True,
        head="nodes",
        targets="classes on every node (samples, nodes), -1 where not a target",
        fits=are_node_classes,
    )
)


def judge_source_localization(
    sources: np.ndarray, predicted: np.ndarray, train_sources: np.ndarray, curve: list[dict[str, float]]
) -> dict[str, Any]:
    """The chance level (always naming the training split's most frequent source) and the flags
    ``at_chance`` and ``loss_never_fell``; no confusion matrix (it would be nodes by nodes).

    Shapes: sources and predicted ``(samples,)``, train_sources ``(train samples,)``."""
    chance = chance_accuracy(train_sources, sources)
    flags = ["at_chance"] * (share_equal(predicted, sources) <= chance) + ["loss_never_fell"] * loss_never_fell(curve)
    return {"chance_accuracy": chance, "flags": flags}


SOURCE_LOCALIZATION = TASKS.add(
    Task(
        name="source_localization",
        loss=node_cross_entropy,
        tally=tally_located,
        finish=share,
        predict=located_nodes,
        score_predicted=share_equal,
        judge=judge_source_localization,
        metric="accuracy",
        higher_is_better=True,
        head="nodes",
        targets="source nodes (samples,)",
        fits=are_nodes,
    )
)


NODE_REGRESSION = TASKS.add(
    regression_task("node_regression", "nodes", "values on every node (samples, nodes, outputs)", are_node_values)
)
