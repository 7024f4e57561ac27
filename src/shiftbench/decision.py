"""The decision study's settings: does a graph model earn its keep on this data, and is it the
user's graph that makes the difference?

The study (``shiftbench-decide``) runs in three modules: these settings and search spaces; the
protocol that tunes and evaluates every candidate over outer folds (:mod:`decision_protocol`);
the paired statistics and sentences of the verdict (:mod:`verdict`).

- **Units**: outer folds, ``splits`` (K) folds x ``repetitions``; the test parts of one
  repetition are disjoint and cover the data once. Seeds within a fold are averaged into one
  unit: the fold is the unit of replication.
- **Protocols**: ``nested`` (default): every trained candidate is tuned inside every fold, on a
  validation part carved from that fold's training part, so no test part ever chose anything;
  ``tune_once``: tuned once, in fold 0, and that setting evaluated on every fold (cheaper; the
  other folds' test parts then hold samples that chose it).
- **Controls**: every candidate that reads the data's native graph is also evaluated, over the
  same units, on a degree-preserving rewiring of that graph (a new one per unit) with its tuned
  setting (``tune_controls``: tuned on its own equal budget instead).

Every job goes through the store, so a rerun trains nothing that is done and resumes what was cut.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, fields
from pathlib import Path, PurePath
from typing import Any

from omegaconf import DictConfig, OmegaConf
from omegaconf.errors import OmegaConfBaseException

from shiftbench.config import FRACTION, Check, Schema, at_least, declared, one_of, validate, wrong_type
from shiftbench.errors import ConfigError
from shiftbench.registry import FAMILIES, TASKS, Task

PROTOCOLS = ("nested", "tune_once")


class DecisionError(RuntimeError):
    """The study cannot reach a verdict (every trial of a candidate failed, or no graph-free
    candidate completed every unit); the message says which."""


@dataclass(frozen=True)
class Candidate:
    """A candidate: its name, the overrides that make it, its family, whether it reads a graph,
    and for a control the name of the candidate whose graph it rewires."""

    name: str
    overrides: tuple[str, ...]
    family: str
    uses_graph: bool
    control_of: str | None = None


@dataclass(frozen=True)
class Dimension:
    """One axis of a search space: a range (``low``..``high``, log-scaled or integer) or choices
    (override texts)."""

    key: str
    low: float | None = None
    high: float | None = None
    log: bool = False
    integer: bool = False
    choices: tuple[str, ...] = ()


@dataclass
class StudyConfig(Schema):
    """The study's scalar settings (``decision/settings.yaml``, overridden by ``decision.KEY=VALUE``)."""

    trials: int = declared(at_least(1), 16)
    splits: int = declared(at_least(2), 5)
    repetitions: int = declared(at_least(1), 1)
    seeds: int = declared(at_least(1), 2)
    protocol: str = declared(one_of(PROTOCOLS), "nested")
    tune_controls: bool = False
    tuning_seeds: int = declared(at_least(1), 1)
    parallel_trials: int = declared(at_least(1), 1)
    only: str = ""
    storage: str = declared(Check(lambda value: isinstance(value, str) and (value in ("journal", "none") or "://" in value),
                                  "journal (a file in the study's folder), none, or a database URL such as "
                                  "sqlite:///tuning.db"), "journal")
    rope: float = declared(Check(lambda value: 0 <= value < 1, "a number in [0, 1) (in the metric's units)"), 0.01)
    alpha: float = declared(FRACTION, 0.05)
    sampler_seed: int = declared(at_least(0), 0)
    folder: str = declared(Check(lambda value: isinstance(value, str) and value != "" and not PurePath(value).is_absolute()
                                 and ".." not in PurePath(value).parts,
                                 "a folder name under results_dir (relative, no '..')"), "decision")


@dataclass
class Settings:
    """The study's settings: the scalar ones, the candidates (controls included, each right
    after its candidate), the search spaces, the task, and the graph candidates that have no
    control with the reason."""

    study: StudyConfig
    candidates: list[Candidate]
    spaces: dict[str, list[Dimension]] = field(default_factory=dict)
    task: Task = field(default_factory=lambda: TASKS["classification"])
    uncontrolled: dict[str, str] = field(default_factory=dict)

    @property
    def units(self) -> range:
        """The outer folds: ``split`` numbers ``repetition x splits + fold``."""
        return range(self.study.splits * self.study.repetitions)


def override_text(value: Any) -> str:
    """A value as Hydra override text: lists without spaces, other values as YAML writes them."""
    if isinstance(value, (list, tuple)):
        return "[" + ",".join(override_text(item) for item in value) + "]"
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def read_space(path: Path) -> list[Dimension]:
    """A search space file: ``KEY: {low, high[, log][, integer]}`` or ``KEY: {choices: [...]}``."""
    try:
        content = OmegaConf.to_container(OmegaConf.load(path))
    except Exception as error:  # YAML's refusal of a malformed file
        raise ConfigError(f"search space {path}: {_first_line(error)}; accepted: KEY: {{low, high}} or KEY: {{choices: [...]}} lines") from None
    accepted = "{low: A, high: B[, log: true][, integer: true]} with A <= B, or {choices: [at least one]}"
    if not isinstance(content, dict) or not content:
        shape = "is empty" if not content else f"is a {type(content).__name__}, not KEY: VALUE lines"
        raise ConfigError(f"search space {path}: {shape}; accepted: KEY: {{low, high}} or KEY: {{choices: [...]}} lines")
    dimensions = []
    for key, spec in content.items():
        if not isinstance(spec, dict) or not (set(spec) <= {"low", "high", "log", "integer", "choices"}):
            raise ConfigError(f"search space {path.name}: {key}={spec!r} is not accepted; accepted: {accepted}")
        if "choices" in spec:
            if not isinstance(spec["choices"], list) or not spec["choices"]:
                raise ConfigError(f"search space {path.name}: {key}.choices={spec['choices']!r} is not accepted; accepted: a non-empty list")
            dimensions.append(Dimension(key, choices=tuple(override_text(value) for value in spec["choices"])))
            continue
        low, high = spec.get("low"), spec.get("high")
        if not isinstance(low, (int, float)) or not isinstance(high, (int, float)) or low > high or (spec.get("log") and low <= 0):
            raise ConfigError(f"search space {path.name}: {key}={spec!r} is not accepted; accepted: {accepted} (log needs A > 0)")
        dimensions.append(Dimension(key, float(low), float(high), bool(spec.get("log")), bool(spec.get("integer"))))
    return dimensions


def read_study(base: DictConfig, overrides: list[str]) -> StudyConfig:
    """The scalar settings of ``base`` (the settings file) with ``decision.*`` overrides, checked
    against :class:`StudyConfig`; one line for an unknown key, a wrong type or a value out of range."""
    accepted_keys = ["candidates", *(item.name for item in fields(StudyConfig))]
    try:
        changes = OmegaConf.from_dotlist([line.removeprefix("decision.") for line in overrides])
        unknown = [key for key in changes if key not in accepted_keys]
        if unknown:
            raise ConfigError(f"unknown key decision.{unknown[0]}")
        scalar = OmegaConf.merge(OmegaConf.structured(StudyConfig),
                                 {key: value for key, value in base.items() if key != "candidates"},
                                 {key: value for key, value in changes.items() if key != "candidates"})
        return OmegaConf.to_object(scalar)
    except ConfigError as error:
        if "accepted" in str(error):
            raise ConfigError(f"decision.{error}" if not str(error).startswith("decision.") else str(error)) from None
        raise ConfigError(f"{error}; accepted keys: decision.{', decision.'.join(accepted_keys)}") from None
    except OmegaConfBaseException as error:  # a wrong type
        raise wrong_type("decision", StudyConfig, error) from None
    except Exception as error:  # what OmegaConf's dotlist parser refuses
        raise ConfigError(f"{_first_line(error)}; accepted keys: decision.{', decision.'.join(accepted_keys)}") from None


def chosen_entries(entries: Any, only: str) -> list[Any]:
    """The candidate entries ``decision.only`` keeps: a comma-separated list of candidate names
    or the families their ``arch=`` override names (``fc,graph_conv,qda``); empty keeps all."""
    if not only.strip():
        return list(entries)
    wanted = [name.strip() for name in only.split(",") if name.strip()]
    family = lambda entry: next((line.split("=", 1)[1] for line in entry.overrides if str(line).startswith("arch=")), None)
    kept = [entry for entry in entries if str(entry.name) in wanted or family(entry) in wanted]
    known = {str(entry.name) for entry in entries} | {family(entry) for entry in entries if family(entry)}
    unknown = [name for name in wanted if name not in known]
    if unknown:
        raise ConfigError(f"decision.only={only}: {unknown[0]} names no candidate; accepted: candidate names or families "
                          f"among {', '.join(sorted(known))}")
    return kept


def read_settings(settings_dir: Path, overrides: list[str], compose: Callable[[list[str]], DictConfig]) -> Settings:
    """The study's settings with ``decision.*`` overrides applied, every candidate composed once
    and its search space read and checked against its config, before any job runs."""
    base = OmegaConf.load(settings_dir / "settings.yaml")
    study = read_study(base, overrides)
    listed = OmegaConf.merge(base, OmegaConf.from_dotlist(
        [line.removeprefix("decision.") for line in overrides if line.startswith("decision.candidates=")]))
    candidates, spaces, tasks, uncontrolled = [], {}, set(), {}
    kept = chosen_entries(listed.candidates, study.only)
    for entry in kept:
        composed, lines = compose_candidate(entry, compose)
        if composed is None:
            continue  # a floor for another task (ridge in a classification study, say)
        tasks.add(composed.task)
        family = composed.arch.family
        candidate = Candidate(str(entry.name), tuple(lines), family, FAMILIES[family].uses_graph)
        candidates.append(candidate)
        if candidate.uses_graph:
            control = control_of(candidate, composed)
            if isinstance(control, str):
                uncontrolled[candidate.name] = control
            else:
                candidates.append(control)
        if FAMILIES[family].fit is None and family not in spaces:
            spaces[family] = search_space(settings_dir, entry.name, family, composed)
            check_space_values(spaces[family], settings_dir / "search" / f"{family}.yaml", composed)
    if not candidates or not any(not c.uses_graph for c in candidates):
        raise ConfigError("decision.candidates must hold at least one graph-free candidate to compare against")
    if len(tasks) > 1:
        raise ConfigError(f"decision.candidates learn different tasks ({', '.join(sorted(tasks))}); accepted: one task")
    if len({c.name for c in candidates}) != len(candidates):
        raise ConfigError("decision.candidates: two candidates share a name; accepted: distinct names")
    return Settings(study, candidates, spaces, TASKS[tasks.pop()], uncontrolled)


def compose_candidate(entry: Any, compose: Callable[[list[str]], DictConfig]) -> tuple[DictConfig | None, list[str]]:
    """A candidate's composed and validated config and its overrides (a node task's per-node
    output map added); None when the candidate's family does not serve the study's task."""
    try:
        lines = list(entry.overrides)
        composed = compose(lines)
        family_tasks = FAMILIES[composed.arch.family].tasks if composed.arch.family in FAMILIES else None
        if family_tasks is not None and composed.task not in family_tasks:
            return None, lines
        if node_task(composed) and "readout" in composed.arch:
            lines.append("arch.readout=node")  # a value on every node: the per-node output map
            composed = compose(lines)
        validate(composed)
        return composed, lines
    except ConfigError as error:
        raise ConfigError(f"candidate {entry.name!r}: {error}") from None
    except Exception as error:  # Hydra's refusal of an override it cannot compose
        raise ConfigError(f"candidate {entry.name!r}: {_first_line(error)}") from None


def control_of(candidate: Candidate, composed: DictConfig) -> Candidate | str:
    """The degree-preserving control of a candidate that reads the data's native graph: the same
    overrides on ``graph=rewired`` (the unit's rewiring seed is added per unit); for a candidate
    on another graph, the reason it has none."""
    if composed.graph.source != "native":
        return (f"graph={composed.graph.source} is not the data's native graph, and the rewired control "
                "rewires the native graph only")
    # The native graph's config is the base graph config (operator and scale): carried over as it is.
    lines = tuple(line for line in candidate.overrides if not line.lstrip("+~").startswith("graph"))
    operator = [f"graph.operator={composed.graph.operator}", f"graph.scale={composed.graph.scale}"]
    return Candidate(f"{candidate.name}, rewired", (*lines, "graph=rewired", *operator), candidate.family, True,
                     control_of=candidate.name)


def search_space(settings_dir: Path, name: str, family: str, composed: DictConfig) -> list[Dimension]:
    """The family's search space (``search/<family>.yaml``), every key checked against the
    candidate's config; a node task keeps the per-node output map (pooling readouts not searched)."""
    path = settings_dir / "search" / f"{family}.yaml"
    if not path.is_file():
        raise ConfigError(f"candidate {name!r}: no search space {path}; accepted: a search/<family>.yaml file")
    space = [dimension for dimension in read_space(path) if not (node_task(composed) and dimension.key == "arch.readout")]
    for dimension in space:
        if OmegaConf.select(composed, dimension.key, default="<absent>") == "<absent>":
            raise ConfigError(f"search space {path.name}: unknown key {dimension.key}; accepted: a key of the {family} job config")
    return space


def check_space_values(space: list[Dimension], path: Path, composed: DictConfig) -> None:
    """Every choice, and both ends of every range, validated in the candidate's composed config,
    so a value its schema refuses (``arch.hidden: {choices: [[0]]}``) stops the study before the
    first job instead of failing trials."""
    import yaml

    for dimension in space:
        ends = [dimension.low, dimension.high] if not dimension.choices else []
        values = dimension.choices or tuple(override_text(int(end) if dimension.integer else end) for end in ends)
        for value in values:
            trial = composed.copy()
            OmegaConf.update(trial, dimension.key, yaml.safe_load(value), force_add=True)
            try:
                validate(trial)
            except ConfigError as error:
                named = str(error) if str(error).startswith(f"{dimension.key}=") else f"{dimension.key}={value}: {error}"
                raise ConfigError(f"search space {path.name}: {named}") from None


def node_task(composed: DictConfig) -> bool:
    """Whether the composed job config's task predicts a value on every node."""
    return TASKS[composed.task].head == "nodes" if composed.task in TASKS else False


def _first_line(error: Exception) -> str:
    return str(error).strip().splitlines()[0]
