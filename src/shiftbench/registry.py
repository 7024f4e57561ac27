"""The registry: every component (family, graph source, dataset, shift operator, task) is one
entry, declared in the module that implements it. Code that used to branch on names asks here.

A component module adds its entry at import (``FAMILIES.add(Family(...))``); :func:`load_components`
imports the modules listed in :data:`COMPONENT_MODULES`, so adding a component is one file plus
one line in that list. This module imports nothing of the project but its error type, so any
layer may read the registry without reaching into the layers after it.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar

from shiftbench.errors import ConfigError

# The modules that declare components, in the order of the data walk. One line a component file.
COMPONENT_MODULES = [
    "shiftbench.task",
    "shiftbench.graphs.operators",
    "shiftbench.data.sensor_regimes",
    "shiftbench.data.sensor_dynamics",
    "shiftbench.data.digits",
    "shiftbench.data.ucr",
    "shiftbench.data.tser",
    "shiftbench.data.series_gaps",
    "shiftbench.data.files",
    "shiftbench.data.regions",
    "shiftbench.graphs.sources",
    "shiftbench.graphs.from_signals",
    "shiftbench.graphs.files",
    "shiftbench.models.fc",
    "shiftbench.models.line_conv",
    "shiftbench.models.shift_polynomial_net",
    "shiftbench.models.nearest",
    "shiftbench.models.floors",
]


@dataclass(frozen=True)
class Family:
    """A model family.

    Attributes:
        name: the ``arch.family`` value.
        schema: its config dataclass (``__post_init__`` checks ranges with one-line errors).
        display: how tables and plots name it.
        build: ``(arch, nodes, features, outputs, shift, head) -> nn.Module`` for trained
            families: ``head`` ``pooled`` maps a signal to ``outputs`` numbers (class logits),
            ``nodes`` maps it to ``outputs`` numbers on every node.
        fit: ``(arch, dataset, seed, task) -> TrainingResult`` for families fitted without the loop.
        planned_parameters: ``(arch, nodes, features, outputs, head) -> int``, from the config
            alone.
        planned_activations: ``(arch, nodes, features, outputs, head) -> int``: the numbers one
            sample keeps alive between its forward and backward pass (0 for families fitted
            without the loop), for the memory check.
        width_key: the config key that ``arch.budget`` scales, or None.
        uses_graph: True when the family reads the configured graph (its shift operator).
        structure: ``(arch) -> (graph, operator)`` that the family uses when it does not read the
            configured graph (``line_conv``: the line graph's delay; graph-free: ``none``).
        marker: the matplotlib marker of its points.
        tasks: the tasks it serves (None: every task; the floors serve some).
    """

    name: str
    schema: type
    display: str
    planned_parameters: Callable[..., int]
    planned_activations: Callable[..., int] = lambda arch, nodes, features, outputs, head: 0
    build: Callable[..., Any] | None = None
    fit: Callable[..., Any] | None = None
    width_key: str | None = None
    uses_graph: bool = False
    structure: Callable[[Any], tuple[str, str]] = lambda arch: ("none", "none")
    marker: str = "d"
    tasks: tuple[str, ...] | None = None


@dataclass(frozen=True)
class GraphSource:
    """A way to make a graph on a dataset's nodes: ``build(config, dataset) -> Graph``.
    ``schema`` subclasses the graph group's base (operator and scale); ``needs`` names what the
    data must carry beyond its node count and signals (``positions``)."""

    name: str
    schema: type
    build: Callable[..., Any]
    display: str = ""
    needs: tuple[str, ...] = ()


@dataclass(frozen=True)
class DatasetSource:
    """A data source: ``load(config) -> Dataset``; ``schema`` is its config dataclass;
    ``tasks`` names the tasks its targets serve."""

    name: str
    schema: type
    load: Callable[..., Any]
    display: str = ""
    tasks: tuple[str, ...] = ("classification",)


@dataclass(frozen=True)
class Operator:
    """A shift operator: ``matrix(graph) -> scipy.sparse.csr_matrix``."""

    name: str
    matrix: Callable[..., Any]


@dataclass(frozen=True)
class Task:
    """What a job learns and how it is scored.

    Attributes:
        loss: ``(outputs, targets) -> scalar tensor``, the mean over the scored targets.
        tally: ``(outputs, targets) -> (total, count)``, float64 tensors that sum over batches
            into the primary metric (``finish(total, count)``).
        finish: ``(total, count) -> float``, the primary metric of summed tallies.
        predict: ``outputs -> tensor`` of predictions (class indices, or the outputs themselves).
        score_predicted: ``(predicted, targets) -> float``, the primary metric of numpy
            predictions (what a floor fitted outside torch predicts).
        judge: ``(targets, predicted, train_targets, curve) -> dict`` of the record's further
            figures (per-class metrics or error figures, the chance level) and its ``flags`` on
            a suspect run.
        metric: the primary metric's name in records and tables (``accuracy``, ``rmse``).
        higher_is_better: the metric's direction.
        head: ``pooled`` (one output per signal) or ``nodes`` (one per node).
        targets: what its targets are, in words (for errors): ``class labels (samples,)``.
        fits: ``(targets, nodes) -> bool``: whether a dataset's targets are such.
    """

    name: str
    loss: Callable[..., Any]
    tally: Callable[..., Any]
    finish: Callable[..., float]
    predict: Callable[..., Any]
    score_predicted: Callable[..., float]
    judge: Callable[..., dict[str, Any]]
    metric: str
    higher_is_better: bool
    head: str
    targets: str
    fits: Callable[..., bool]

    def score(self, outputs: Any, targets: Any) -> float:
        """The primary metric of ``outputs`` against ``targets`` (one tally, finished)."""
        return self.finish(*self.tally(outputs, targets))

    def better(self, value: float) -> float:
        """``value`` signed so that larger is better (for ranking epochs and settings)."""
        return value if self.higher_is_better else -value


Entry = TypeVar("Entry")


@dataclass
class Registry(Generic[Entry]):
    """Entries of one kind, by name, in the order they were added."""

    kind: str
    key: str
    entries: dict[str, Entry] = field(default_factory=dict)

    def add(self, entry: Entry) -> Entry:
        name = entry.name  # type: ignore[attr-defined]
        if name in self.entries and self.entries[name] is not entry:
            raise ValueError(f"{self.kind} {name!r} is declared twice")
        self.entries[name] = entry
        return entry

    def __getitem__(self, name: str) -> Entry:
        load_components()
        if name not in self.entries:
            raise ConfigError(f"{self.key}={name!r} is not accepted; accepted: one of {', '.join(self.entries)}")
        return self.entries[name]

    def __contains__(self, name: object) -> bool:
        load_components()
        return name in self.entries

    def __iter__(self) -> Iterator[Entry]:
        load_components()
        return iter(list(self.entries.values()))

    def names(self) -> tuple[str, ...]:
        load_components()
        return tuple(self.entries)


FAMILIES: Registry[Family] = Registry("family", "arch.family")
GRAPH_SOURCES: Registry[GraphSource] = Registry("graph source", "graph.source")
DATASETS: Registry[DatasetSource] = Registry("dataset", "data.source")
OPERATORS: Registry[Operator] = Registry("shift operator", "graph.operator")
TASKS: Registry[Task] = Registry("task", "task")

_loaded: set[str] = set()


def load_components() -> None:
    """Import every component module not imported yet, so every registry is complete."""
    for module in COMPONENT_MODULES:
        if module not in _loaded:
            _loaded.add(module)
            importlib.import_module(module)
