"""Each default lives in one place, the schema's dataclass: YAML presets and studies set only what
differs from it (common practice, no source)."""

from pathlib import Path

import yaml

from shiftbench.config import TrainConfig
from shiftbench.config_store import schema_defaults
from shiftbench.registry import DATASETS, FAMILIES, GRAPH_SOURCES

ROOT = Path(__file__).resolve().parents[2]
GROUPS = {"data": ("source", DATASETS), "graph": ("source", GRAPH_SOURCES), "arch": ("family", FAMILIES)}


def restated(group: str, values: dict, option: str | None) -> list[str]:
    if group == "train":
        defaults = schema_defaults(TrainConfig)
    else:
        key, registry = GROUPS[group]
        name = values.get(key, option)
        if name not in registry:
            return []
        defaults = {**schema_defaults(registry[name].schema), key: name}
        values = {k: v for k, v in values.items() if k != key}
    return [f"{group}.{k}={v!r}" for k, v in values.items() if k in defaults and defaults[k] == v]


def yaml_files() -> list[Path]:
    return sorted((ROOT / "configs").rglob("*.yaml"))


def test_no_yaml_value_restates_a_schema_default():
    problems = []
    for path in yaml_files():
        content = yaml.safe_load(path.read_text()) or {}
        in_group = path.parent.name in (*GROUPS, "train") and path.parent.parent.name == "configs"
        if in_group:
            problems += [f"{path.name}: {p}" for p in restated(path.parent.name, content, path.stem)]
        for group in (*GROUPS, "train"):
            if isinstance(content.get(group), dict):
                problems += [f"{path.name}: {p}" for p in restated(group, content[group], None)]
    assert problems == []


def test_the_check_catches_a_restated_default():
    assert restated("train", {"lr": 0.01, "epochs": 40}, None) == ["train.lr=0.01"]
    assert restated("arch", {"family": "fc", "hidden": [64]}, None) == ["arch.hidden=[64]"]
