"""Config validation: the boundary where user input is checked.

Each config group (``data``, ``graph``, ``arch``) has one dataclass per option, declared by the
component that implements the option and found in the registry by the option's discriminating key
(``data.source``, ``graph.source``, ``arch.family``); ``train`` and the top-level keys are declared
here. The composed Hydra config is merged into these schemas (wrong types and unknown keys fail
there) and then instantiated, which runs each schema's range checks. Every failure is a
:class:`ConfigError` whose message is one line naming the key, the value and what is accepted.

This module reads the registry and imports nothing of the data, graph or model layers.
"""

from __future__ import annotations

import math
import typing
from collections.abc import Callable, Iterable
from dataclasses import MISSING, asdict, dataclass, field, fields
from pathlib import PurePath
from typing import Any

import torch
from omegaconf import DictConfig, OmegaConf
from omegaconf.errors import ConfigKeyError, OmegaConfBaseException

from shiftbench.errors import ConfigError
from shiftbench.registry import DATASETS, FAMILIES, GRAPH_SOURCES, TASKS, Registry

__all__ = ["ConfigError", "RunConfig", "validate"]

OPTIMIZERS = ("adam", "sgd", "adadelta")
# Which weights a run ends with: those of the epoch with the best validation accuracy (ties: lower
# validation loss), of the lowest training loss, or of the last epoch. The last two need no
# validation split, as papers that fit on a whole archive train split had it.
KEEPS = ("best_val", "lowest_train_loss", "last")
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


@dataclass(frozen=True)
class Check:
    """A constraint declared on a schema field: ``test(value)`` must hold; ``accepted`` (text, or
    a function giving it, for choices known only once the registry is loaded) says what would."""

    test: Callable[[Any], bool]
    accepted: str | Callable[[], str]

    def text(self) -> str:
        return self.accepted if isinstance(self.accepted, str) else self.accepted()


def declared(check: Check, default: Any = MISSING, default_factory: Any = MISSING) -> Any:
    """A dataclass field carrying ``check`` in its metadata (see :class:`Schema`)."""
    return field(default=default, default_factory=default_factory, metadata={"check": check})


def input_file(check: Check | None = None) -> Any:
    """A field naming a file the job reads (empty: none): its content, not only its name, goes
    into the job's hash (``shiftbench.input_files``)."""
    metadata = {"reads_file": True} if check is None else {"reads_file": True, "check": check}
    return field(default="", metadata=metadata)


def finite(value: Any) -> bool:
    """A number other than NaN and the infinities (``inf`` passes every ``>=`` bound)."""
    return isinstance(value, (int, float)) and math.isfinite(value)


def at_least(low: int, kind: str = "an integer") -> Check:
    return Check(lambda value: finite(value) and value >= low, f"{kind} >= {low}")


def one_of(choices: Iterable[str] | Callable[[], Iterable[str]]) -> Check:
    names = choices if callable(choices) else (lambda fixed=tuple(choices): fixed)
    return Check(lambda value: value in tuple(names()), lambda: "one of " + ", ".join(names()))


POSITIVE = Check(lambda value: finite(value) and value > 0, "a number > 0")
FRACTION = Check(lambda value: 0.0 < value < 1.0, "a number strictly between 0 and 1")
PROBABILITY = Check(lambda value: 0.0 <= value <= 1.0, "a probability in [0, 1]")
DROPOUT = Check(lambda value: 0.0 <= value < 1.0, "a probability in [0, 1)")
BUDGET = Check(lambda value: value is None or value >= 1, "null (widths as configured) or an integer >= 1")


class Schema:
    """The base of every config schema: on construction, one generic validator checks each
    field's declared :class:`Check` (in field order), then :meth:`check` runs the checks that
    involve several fields. Every refusal is a one-line :class:`ConfigError`."""

    def __post_init__(self) -> None:
        for item in fields(self):  # type: ignore[arg-type]
            check = item.metadata.get("check")
            if check is not None:
                value = getattr(self, item.name)
                require(item.name, value, check.test(value), check.text())
        self.check()

    def check(self) -> None:
        """Checks across fields; none by default."""


def batch_size_for(config: "TrainConfig", cases: int) -> int:
    """The batch size training on ``cases`` cases uses: ``batch_size``, or with
    ``batch_fraction`` set, ``max(1, min(batch_size, floor(cases * batch_fraction)))``."""
    if config.batch_fraction is None:
        return config.batch_size
    return max(1, min(config.batch_size, int(cases * config.batch_fraction)))


# ---------------------------------------------------------------------------------------- train


@dataclass
class TrainConfig(Schema):
    """Optimizer, batches, the learning-rate schedule, which weights are kept, and early stopping
    on the criterion that keeps them."""

    optimizer: str = declared(one_of(OPTIMIZERS), "adam")
    lr: float = declared(POSITIVE, 0.01)
    momentum: float = declared(Check(lambda value: 0.0 <= value < 1.0, "a number in [0, 1)"), 0.9)
    weight_decay: float = declared(at_least(0, "a number"), 0.0)
    batch_size: int = declared(at_least(1), 64)
    # Batches of at most this share of the training cases (at least 1 case): the time-series
    # literature's min(16, cases / 10) is batch_size 16 with batch_fraction 0.1; null: batch_size.
    batch_fraction: float | None = declared(
        Check(lambda value: value is None or 0.0 < value <= 1.0, "a number in (0, 1], or null"), None
    )
    epochs: int = declared(at_least(1), 100)
    # Epochs without improvement (of the criterion `keep` names) before stopping; 0 trains every
    # epoch (no early stopping). `keep: last` improves every epoch, so it never stops early.
    patience: int = declared(Check(lambda value: value >= 0, "an integer >= 0 (0: no early stopping)"), 15)
    keep: str = declared(one_of(KEEPS), "best_val")
    # Halve (plateau_factor) the learning rate after plateau_patience epochs without a lower
    # training loss, down to min_lr (torch's ReduceLROnPlateau); 0: a fixed learning rate.
    plateau_patience: int = declared(Check(lambda value: value >= 0, "an integer >= 0 (0: a fixed learning rate)"), 0)
    plateau_factor: float = declared(FRACTION, 0.5)
    min_lr: float = declared(at_least(0, "a number"), 0.0)
    checkpoint_every: int = declared(Check(lambda value: value >= 0, "an integer >= 0 (0: never)"), 10)
    max_seconds: float | None = declared(
        Check(lambda value: value is None or value > 0, "a number of seconds > 0, or null"), None
    )


# ----------------------------------------------------------------------------------------- root


@dataclass
class RunConfig:
    """One job's whole config, validated. ``split`` numbers the random train/validation/test
    split (0: the dataset's own), or with ``folds`` K >= 2 the outer fold ``split`` = repetition x K +
    fold; ``seed`` drives everything else random in training."""

    seed: int
    split: int
    folds: int
    task: str
    results_dir: str
    device: str
    force: bool
    threads: int
    data: Any
    graph: Any
    arch: Any
    train: TrainConfig


ROOT_KEYS = ("seed", "split", "folds", "task", "results_dir", "device", "force", "threads", "data", "graph", "arch", "train")
GROUPS: dict[str, tuple[str, Registry | None]] = {
    "data": ("source", DATASETS),
    "graph": ("source", GRAPH_SOURCES),
    "arch": ("family", FAMILIES),
    "train": ("", None),
}


def _natural(key: str, value: Any) -> None:
    require(key, value, isinstance(value, int) and not isinstance(value, bool) and value >= 0, "an integer >= 0")


def validate(config: DictConfig) -> RunConfig:
    """Check a composed config and return it as typed dataclasses, or raise ConfigError.
    Interpolations are resolved first, against the whole config (``graph.seed: ${seed}``)."""
    config = OmegaConf.create(OmegaConf.to_container(config, resolve=True))
    unknown = [key for key in config.keys() if key not in ROOT_KEYS]
    if unknown:
        raise ConfigError(f"unknown key {unknown[0]}; accepted top-level keys: {', '.join(ROOT_KEYS)}")
    for key in ROOT_KEYS:
        if key not in config:
            raise ConfigError(f"missing key {key!r}")
    device, results_dir = config.device, config.results_dir
    _natural("seed", config.seed)
    _natural("split", config.split)
    folds = config.folds
    require("folds", folds, isinstance(folds, int) and not isinstance(folds, bool) and (folds == 0 or folds >= 2),
            "0 (no outer folds) or an integer >= 2")
    require_choice("task", config.task, TASKS.names())
    require_choice("device", device, DEVICES)
    require("device", device, device != "cuda" or torch.cuda.is_available(), "cpu (no CUDA device is available here)")
    require("results_dir", results_dir, isinstance(results_dir, str) and results_dir != "", "a folder path")
    require_inside("results_dir", results_dir)
    require("force", config.force, isinstance(config.force, bool), "true or false")
    threads = config.threads
    require("threads", threads, isinstance(threads, int) and not isinstance(threads, bool) and threads >= 1, "an integer >= 1")
    groups = {group: validate_group(group, config[group]) for group in GROUPS}
    run = RunConfig(
        seed=config.seed, split=config.split, folds=config.folds, task=config.task, results_dir=results_dir, device=device,
        force=config.force, threads=threads, **groups,
    )
    nodes = run.data.known_nodes()
    if nodes is not None:
        check_graph_fits(run.graph, run.arch.family, nodes)
    check_validation_split(run)
    check_task(run)
    return run


def check_task(run: RunConfig) -> None:
    """Checks across groups: the data source has targets for the task, and the family gives
    the task's head (a ``node`` readout for a task on every node, a pooling one otherwise; the
    floors classify whole signals)."""
    task = TASKS[run.task]
    served = DATASETS[run.data.source].tasks
    require("task", run.task, run.task in served, f"{', '.join(served)} for data={run.data.source}")
    family = FAMILIES[run.arch.family]
    if family.tasks is not None:
        require("task", run.task, run.task in family.tasks, f"{', '.join(family.tasks)} for arch={run.arch.family}")
    if hasattr(run.arch, "check_head"):
        run.arch.check_head(task.head)


def check_validation_split(run: RunConfig) -> None:
    """Checks across groups: a run without a validation split (``data.val_fraction=0``) must keep
    weights chosen without one and be trained by the loop (the floors choose on validation)."""
    if getattr(run.data, "val_fraction", None) != 0:
        return
    require("train.keep", run.train.keep, run.train.keep != "best_val",
            "lowest_train_loss or last when data.val_fraction=0 (no validation split to choose on)")
    require("arch.family", run.arch.family, FAMILIES[run.arch.family].build is not None,
            "a family trained by the loop when data.val_fraction=0 (the floors choose on validation)")


def check_graph_fits(graph: Any, family: str, nodes: int) -> None:
    """Checks across groups: a graph that the family reads must fit the data's ``nodes`` (each
    graph schema says how in ``check_fits``). Run at validation when the data config states its
    size, else once the data is loaded."""
    if FAMILIES[family].uses_graph:
        graph.check_fits(nodes)


def validate_group(group: str, node: Any) -> Any:
    discriminator, registry = GROUPS[group]
    if not isinstance(node, DictConfig):
        raise ConfigError(f"{group}={node!r} is not accepted; accepted: a config of the {group} group")
    choice = node.get(discriminator, "") if discriminator else ""
    if registry is None:
        schema: type = TrainConfig
    elif choice in registry:
        schema = registry[choice].schema
    else:
        raise ConfigError(
            f"{group}.{discriminator}={choice!r} is not accepted; accepted: one of {', '.join(registry.names())}"
        )
    try:
        merged = OmegaConf.merge(OmegaConf.structured(schema), node)
    except ConfigKeyError as error:
        accepted = ", ".join(f.name for f in fields(schema))
        which = f" ({group} {discriminator} {choice})" if discriminator else ""
        raise ConfigError(f"unknown key {group}.{error.key}{which}; accepted keys: {accepted}") from None
    except OmegaConfBaseException as error:
        raise wrong_type(group, schema, error) from None
    try:
        return OmegaConf.to_object(merged)
    except ConfigError as error:
        raise ConfigError(f"{group}.{error}") from None


def wrong_type(group: str, schema: type, error: OmegaConfBaseException) -> ConfigError:
    """The one-line refusal of OmegaConf's type error merging a value into ``schema``'s field."""
    key = str(error.full_key or error.key)
    wanted = _type_name(typing.get_type_hints(schema).get(key.split("[")[0]))
    return ConfigError(f"{group}.{key}={error.value!r} has the wrong type; accepted: {wanted}")


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



def most_common_config(configs: Iterable[dict], group: str) -> dict | None:
    """The component config (plain data, e.g. a record's ``data``) that occurs most often;
    among equally common ones, the one at its schema's defaults (a study that varies the data
    around its defaults)."""
    import json
    from collections import Counter

    counted = Counter(json.dumps(config, sort_keys=True) for config in configs)
    if not counted:
        return None
    top = max(counted.values())
    tied = [json.loads(text) for text, count in counted.items() if count == top]
    at_defaults = [config for config in tied if config == _group_defaults(group, config)]
    return (at_defaults or tied)[0]


def _group_defaults(group: str, config: dict) -> dict | None:
    """``config``'s component at its schema's defaults, as plain data (None if it has none)."""
    try:
        return asdict(validate_group(group, OmegaConf.create({"source": config.get("source")})))
    except ConfigError:
        return None
