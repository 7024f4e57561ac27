"""Config schemas and their validation: the boundary where user input is checked.

Each config group (``data``, ``graph``, ``arch``, ``train``) has one dataclass per option, chosen
by the option's discriminating key (``data.name``, ``graph.source``, ``arch.family``). The composed
Hydra config is merged into these schemas (wrong types and unknown keys fail there) and then
instantiated, which runs each schema's range checks. Every failure is a :class:`ConfigError` whose
message is one line naming the key, the value and what is accepted.
"""

from __future__ import annotations

import typing
from dataclasses import asdict, dataclass, field, fields
from pathlib import PurePath
from typing import Any, Optional

import torch
from omegaconf import DictConfig, OmegaConf
from omegaconf.errors import ConfigKeyError, OmegaConfBaseException

from shiftbench.errors import ConfigError
from shiftbench.graphs.operators import OPERATORS, SCALES
from shiftbench.models.line_conv import BOUNDARIES
from shiftbench.models.nonlinearities import NONLINEARITIES
from shiftbench.models.readouts import READOUTS
from shiftbench.models.stack import NORMALIZATIONS

__all__ = ["ConfigError", "RunConfig", "validate"]

OPTIMIZERS = ("adam", "sgd")
DEVICES = ("cpu", "cuda")


def require(key: str, value: Any, ok: bool, accepted: str) -> None:
    """Raise a ConfigError for ``key=value`` unless ``ok``; ``accepted`` says what would be."""
    if not ok:
        raise ConfigError(f"{key}={value!r} is not accepted; accepted: {accepted}")


def require_inside(key: str, path: str) -> None:
    """A relative output path must stay below the working folder (no ``..`` step); an absolute
    path is the user's explicit choice."""
    require(key, path, PurePath(path).is_absolute() or ".." not in PurePath(path).parts,
            "a folder below the working folder (no '..'), or an absolute path")


def require_choice(key: str, value: Any, choices: typing.Iterable[str]) -> None:
    choices = tuple(choices)
    require(key, value, value in choices, "one of " + ", ".join(choices))


def require_budget(budget: int | None) -> None:
    require("budget", budget, budget is None or budget >= 1, "null (widths as configured) or an integer >= 1")


def require_fraction(key: str, value: float) -> None:
    require(key, value, 0.0 < value < 1.0, "a number strictly between 0 and 1")


# ----------------------------------------------------------------------------------------- data


@dataclass
class DataConfig:
    """What every data source has: the data seed and the validation share."""

    source: str = "sensor_regimes"
    seed: int = 0
    val_fraction: float = 0.2

    def __post_init__(self) -> None:
        require("seed", self.seed, self.seed >= 0, "an integer >= 0")
        require_fraction("val_fraction", self.val_fraction)

    def known_nodes(self) -> int | None:
        """The node count, when the config alone tells it (else it is known once loaded)."""
        return None


@dataclass
class RandomSplitConfig(DataConfig):
    """A data source split at random (stratified) into train, validation and test."""

    test_fraction: float = 0.2

    def __post_init__(self) -> None:
        super().__post_init__()
        require_fraction("test_fraction", self.test_fraction)
        require(
            "test_fraction",
            self.test_fraction,
            self.val_fraction + self.test_fraction < 1.0,
            f"a fraction below {1.0 - self.val_fraction:g} (val_fraction + test_fraction < 1)",
        )


@dataclass
class SensorRegimesConfig(RandomSplitConfig):
    """The demo scenario (see :mod:`shiftbench.data.sensor_regimes`)."""

    source: str = "sensor_regimes"
    nodes: int = 64
    classes: int = 4
    samples_per_class: int = 200
    noise: float = 0.5
    process_order: int = 6
    neighbors: int = 6

    def __post_init__(self) -> None:
        super().__post_init__()
        require("nodes", self.nodes, self.nodes >= 2, "an integer >= 2")
        require("classes", self.classes, self.classes >= 2, "an integer >= 2")
        require("samples_per_class", self.samples_per_class, self.samples_per_class >= 10, "an integer >= 10")
        require("noise", self.noise, self.noise >= 0, "a number >= 0")
        require("process_order", self.process_order, self.process_order >= 0, "an integer >= 0")
        require(
            "neighbors", self.neighbors, 1 <= self.neighbors < self.nodes, f"an integer in 1..{self.nodes - 1}"
        )

    def known_nodes(self) -> int | None:
        return self.nodes


@dataclass
class DigitsConfig(RandomSplitConfig):
    """scikit-learn's 8x8 handwritten digits."""

    source: str = "digits"

    def known_nodes(self) -> int | None:
        return 64


@dataclass
class UcrConfig(DataConfig):
    """A UCR/UEA series shipped with aeon; the archive's own train/test split is kept."""

    source: str = "ucr"
    name: str = "GunPoint"

    def __post_init__(self) -> None:
        super().__post_init__()
        from shiftbench.data.ucr import shipped_names

        require_choice("name", self.name, shipped_names())


@dataclass
class FileDataConfig(RandomSplitConfig):
    """The user's signals in a ``.npz`` or ``.csv`` file (``test_fraction`` applies when the file
    brings no ``split``)."""

    source: str = "file"
    path: str = ""

    def __post_init__(self) -> None:
        super().__post_init__()
        require("path", self.path, self.path != "", "the path of a .npz or .csv file (data.path=...)")


DATA_SCHEMAS: dict[str, type] = {
    "sensor_regimes": SensorRegimesConfig,
    "digits": DigitsConfig,
    "ucr": UcrConfig,
    "file": FileDataConfig,
}

# ---------------------------------------------------------------------------------------- graph


@dataclass
class GraphConfig:
    """A graph source with no parameters of its own (``native``, ``line``, ``cycle``, ``path``)."""

    source: str = "native"
    operator: str = "adjacency"
    scale: str = "spectral"

    def __post_init__(self) -> None:
        require_choice("operator", self.operator, OPERATORS)
        require_choice("scale", self.scale, SCALES)


@dataclass
class GridGraphConfig(GraphConfig):
    source: str = "grid"
    rows: int = 8
    cols: int = 8

    def __post_init__(self) -> None:
        super().__post_init__()
        require("rows", self.rows, self.rows >= 1, "an integer >= 1")
        require("cols", self.cols, self.cols >= 1, "an integer >= 1")


@dataclass
class KnnGraphConfig(GraphConfig):
    source: str = "knn"
    neighbors: int = 6

    def __post_init__(self) -> None:
        super().__post_init__()
        require("neighbors", self.neighbors, self.neighbors >= 1, "an integer >= 1")


@dataclass
class CorrelationGraphConfig(GraphConfig):
    """Each node's ``neighbors`` strongest absolute correlations over the training split."""

    source: str = "correlation"
    neighbors: int = 6

    def __post_init__(self) -> None:
        super().__post_init__()
        require("neighbors", self.neighbors, self.neighbors >= 1, "an integer >= 1")


@dataclass
class GeometricGraphConfig(GraphConfig):
    """Nodes closer than ``radius`` on their positions."""

    source: str = "geometric"
    radius: float = 0.2

    def __post_init__(self) -> None:
        super().__post_init__()
        require("radius", self.radius, self.radius > 0, "a number > 0")


@dataclass
class RewiredGraphConfig(GraphConfig):
    """The native graph with its edges scrambled, every node keeping its degree."""

    source: str = "rewired"
    swaps_per_edge: float = 5.0
    seed: int = 0

    def __post_init__(self) -> None:
        super().__post_init__()
        require("swaps_per_edge", self.swaps_per_edge, self.swaps_per_edge >= 0, "a number >= 0")
        require("seed", self.seed, self.seed >= 0, "an integer >= 0")


@dataclass
class FileGraphConfig(GraphConfig):
    """The user's graph file (edge-list .csv, scipy .npz, .graphml, .gml)."""

    source: str = "file"
    path: str = ""

    def __post_init__(self) -> None:
        super().__post_init__()
        require("path", self.path, self.path != "", "the path of a graph file (graph.path=...)")


@dataclass
class SbmGraphConfig(GraphConfig):
    source: str = "sbm"
    blocks: int = 4
    p_in: float = 0.3
    p_out: float = 0.02
    seed: int = 0

    def __post_init__(self) -> None:
        super().__post_init__()
        require("blocks", self.blocks, self.blocks >= 1, "an integer >= 1")
        require("p_in", self.p_in, 0.0 <= self.p_in <= 1.0, "a probability in [0, 1]")
        require("p_out", self.p_out, 0.0 <= self.p_out <= 1.0, "a probability in [0, 1]")
        require("seed", self.seed, self.seed >= 0, "an integer >= 0")


GRAPH_SCHEMAS: dict[str, type] = {
    "native": GraphConfig,
    "line": GraphConfig,
    "cycle": GraphConfig,
    "path": GraphConfig,
    "grid": GridGraphConfig,
    "knn": KnnGraphConfig,
    "sbm": SbmGraphConfig,
    "correlation": CorrelationGraphConfig,
    "geometric": GeometricGraphConfig,
    "rewired": RewiredGraphConfig,
    "file": FileGraphConfig,
}

# ----------------------------------------------------------------------------------------- arch


@dataclass
class FcConfig:
    """The MLP: hidden widths, nonlinearity, dropout."""

    family: str = "fc"
    hidden: list[int] = field(default_factory=lambda: [64])
    nonlinearity: str = "relu"
    dropout: float = 0.0
    budget: Optional[int] = None

    def __post_init__(self) -> None:
        require_budget(self.budget)
        require("hidden", self.hidden, all(w >= 1 for w in self.hidden), "a list of integers >= 1")
        require_choice("nonlinearity", self.nonlinearity, NONLINEARITIES)
        require("dropout", self.dropout, 0.0 <= self.dropout < 1.0, "a probability in [0, 1)")


@dataclass
class GraphConvConfig:
    """A stack of graph filters of order ``order``, widths ``channels``."""

    family: str = "graph_conv"
    order: int = 3
    channels: list[int] = field(default_factory=lambda: [16, 16])
    nonlinearity: str = "relu"
    readout: str = "mean"
    dropout: float = 0.0
    normalization: str = "none"
    budget: Optional[int] = None

    def __post_init__(self) -> None:
        require_budget(self.budget)
        require("order", self.order, self.order >= 0, "an integer >= 0")
        require(
            "channels",
            self.channels,
            len(self.channels) >= 1 and all(c >= 1 for c in self.channels),
            "a non-empty list of integers >= 1",
        )
        require_choice("nonlinearity", self.nonlinearity, NONLINEARITIES)
        require_choice("readout", self.readout, READOUTS)
        require("dropout", self.dropout, 0.0 <= self.dropout < 1.0, "a probability in [0, 1)")
        require_choice("normalization", self.normalization, NORMALIZATIONS)


@dataclass
class LineConvConfig(GraphConvConfig):
    """A stack of causal Conv1d layers with kernel size ``order + 1``."""

    family: str = "line_conv"
    boundary: str = "zero"

    def __post_init__(self) -> None:
        super().__post_init__()
        require_choice("boundary", self.boundary, BOUNDARIES)


@dataclass
class NearestConfig:
    """The non-neural floor: 1-nearest-neighbour on the flattened signals (Euclidean)."""

    family: str = "nearest"


ARCH_SCHEMAS: dict[str, type] = {
    "fc": FcConfig,
    "line_conv": LineConvConfig,
    "graph_conv": GraphConvConfig,
    "nearest": NearestConfig,
}

# ---------------------------------------------------------------------------------------- train


@dataclass
class TrainConfig:
    """Optimizer, batches, and early stopping on validation accuracy."""

    optimizer: str = "adam"
    lr: float = 0.01
    momentum: float = 0.9
    weight_decay: float = 0.0
    batch_size: int = 64
    epochs: int = 100
    patience: int = 15
    checkpoint_every: int = 10
    max_seconds: float | None = None

    def __post_init__(self) -> None:
        require_choice("optimizer", self.optimizer, OPTIMIZERS)
        require("lr", self.lr, self.lr > 0, "a number > 0")
        require("momentum", self.momentum, 0.0 <= self.momentum < 1.0, "a number in [0, 1)")
        require("weight_decay", self.weight_decay, self.weight_decay >= 0, "a number >= 0")
        require("batch_size", self.batch_size, self.batch_size >= 1, "an integer >= 1")
        require("epochs", self.epochs, self.epochs >= 1, "an integer >= 1")
        require("patience", self.patience, self.patience >= 1, "an integer >= 1")
        require("checkpoint_every", self.checkpoint_every, self.checkpoint_every >= 0, "an integer >= 0 (0: never)")
        if self.max_seconds is not None:
            require("max_seconds", self.max_seconds, self.max_seconds > 0, "a number of seconds > 0, or null")


# ----------------------------------------------------------------------------------------- root


@dataclass
class RunConfig:
    """One job's whole config, validated."""

    seed: int
    results_dir: str
    device: str
    force: bool
    data: DataConfig
    graph: GraphConfig
    arch: FcConfig | GraphConvConfig | NearestConfig
    train: TrainConfig


ROOT_KEYS = ("seed", "results_dir", "device", "force", "data", "graph", "arch", "train")
GROUPS: dict[str, tuple[str, dict[str, type]]] = {
    "data": ("source", DATA_SCHEMAS),
    "graph": ("source", GRAPH_SCHEMAS),
    "arch": ("family", ARCH_SCHEMAS),
    "train": ("", {"": TrainConfig}),
}


def validate(config: DictConfig) -> RunConfig:
    """Check a composed config and return it as typed dataclasses, or raise ConfigError."""
    unknown = [key for key in config.keys() if key not in ROOT_KEYS]
    if unknown:
        raise ConfigError(f"unknown key {unknown[0]}; accepted top-level keys: {', '.join(ROOT_KEYS)}")
    for key in ROOT_KEYS:
        if key not in config:
            raise ConfigError(f"missing key {key!r}")
    seed, device, results_dir = config.seed, config.device, config.results_dir
    require("seed", seed, isinstance(seed, int) and not isinstance(seed, bool) and seed >= 0, "an integer >= 0")
    require_choice("device", device, DEVICES)
    require("device", device, device != "cuda" or torch.cuda.is_available(), "cpu (no CUDA device is available here)")
    require("results_dir", results_dir, isinstance(results_dir, str) and results_dir != "", "a folder path")
    require_inside("results_dir", results_dir)
    require("force", config.force, isinstance(config.force, bool), "true or false")
    groups = {group: _validate_group(group, config[group]) for group in GROUPS}
    run = RunConfig(seed=seed, results_dir=results_dir, device=device, force=config.force, **groups)
    nodes = run.data.known_nodes()
    if nodes is not None:
        check_graph_fits(run.graph, run.arch.family, nodes)
    return run


def check_graph_fits(graph: GraphConfig, family: str, nodes: int) -> None:
    """Checks across groups: a graph a ``graph_conv`` uses must fit the data's ``nodes``.
    Run at validation when the data config states its size, else once the data is loaded."""
    if family != "graph_conv":
        return
    if isinstance(graph, GridGraphConfig) and graph.rows * graph.cols != nodes:
        raise ConfigError(
            f"graph.rows*graph.cols={graph.rows}*{graph.cols}={graph.rows * graph.cols} is not accepted; "
            f"accepted: rows*cols equal to the data's {nodes} nodes"
        )
    if isinstance(graph, (KnnGraphConfig, CorrelationGraphConfig)) and graph.neighbors >= nodes:
        raise ConfigError(
            f"graph.neighbors={graph.neighbors} is not accepted; accepted: fewer than the data's {nodes} nodes"
        )


def _validate_group(group: str, node: Any) -> Any:
    discriminator, schemas = GROUPS[group]
    if not isinstance(node, DictConfig):
        raise ConfigError(f"{group}={node!r} is not accepted; accepted: a config of the {group} group")
    choice = node.get(discriminator, "") if discriminator else ""
    if choice not in schemas:
        raise ConfigError(
            f"{group}.{discriminator}={choice!r} is not accepted; accepted: one of {', '.join(schemas)}"
        )
    schema = schemas[choice]
    try:
        merged = OmegaConf.merge(OmegaConf.structured(schema), node)
    except ConfigKeyError as error:
        accepted = ", ".join(f.name for f in fields(schema))
        which = f" ({group} {discriminator} {choice})" if discriminator else ""
        raise ConfigError(f"unknown key {group}.{error.key}{which}; accepted keys: {accepted}") from None
    except OmegaConfBaseException as error:
        key = str(error.full_key or error.key)
        wanted = _type_name(typing.get_type_hints(schema).get(key.split("[")[0]))
        raise ConfigError(
            f"{group}.{key}={error.value!r} has the wrong type; accepted: {wanted}"
        ) from None
    try:
        return OmegaConf.to_object(merged)
    except ConfigError as error:
        raise ConfigError(f"{group}.{error}") from None


def _type_name(annotation: Any) -> str:
    singular = {int: "an integer", float: "a number", str: "a string", bool: "true or false"}
    plural = {int: "integers", float: "numbers", str: "strings", bool: "booleans"}
    if annotation in singular:
        return singular[annotation]
    if typing.get_origin(annotation) is typing.Union:
        kinds = [item for item in typing.get_args(annotation) if item is not type(None)]
        return "null or " + " or ".join(_type_name(item) for item in kinds)
    if typing.get_origin(annotation) is list:
        (item,) = typing.get_args(annotation)
        return f"a list of {plural.get(item, item)}"
    return str(annotation)


def as_plain_dict(run: RunConfig) -> dict[str, Any]:
    """The validated config as plain JSON-ready data."""
    return asdict(run)

