"""Every option of the ``data``, ``graph``, ``arch`` and ``train`` groups, registered in Hydra's
ConfigStore from its schema's defaults, so each default lives in one place: the dataclass that
declares it. YAML files under ``configs/<group>/`` are presets that set only what differs."""

from __future__ import annotations

from dataclasses import MISSING, fields
from typing import Any

from hydra.core.config_store import ConfigStore

from shiftbench.config import TrainConfig
from shiftbench.registry import DATASETS, FAMILIES, GRAPH_SOURCES

_stored: set[tuple[str, str]] = set()


def schema_defaults(schema: type) -> dict[str, Any]:
    """Each field's default, read without instantiating (the checks would refuse required-by-
    use fields such as an empty ``path``)."""
    return {
        f.name: f.default if f.default is not MISSING else f.default_factory()  # type: ignore[misc]
        for f in fields(schema)
    }


def register_defaults() -> None:
    """Store one config node per registered component (``arch=fc``, ``graph=knn``, ...) and
    ``train=default``; components registered since the last call are added."""
    store = ConfigStore.instance()
    for group, key, registry in (("data", "source", DATASETS), ("graph", "source", GRAPH_SOURCES), ("arch", "family", FAMILIES)):
        for entry in registry:
            if (group, entry.name) not in _stored:
                _stored.add((group, entry.name))
                store.store(group=group, name=entry.name, node={**schema_defaults(entry.schema), key: entry.name})
    if ("train", "default") not in _stored:
        _stored.add(("train", "default"))
        store.store(group="train", name="default", node=schema_defaults(TrainConfig))
