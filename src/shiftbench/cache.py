"""Things many jobs of a sweep share (datasets, graphs, shift operators), built once per
process and kept by the config that made them."""

from __future__ import annotations

import json
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import asdict
from typing import Any, TypeVar

Built = TypeVar("Built")

# Enough for the datasets and graphs of a study; the oldest entry goes first beyond it.
LIMIT = 8
_STORE: OrderedDict[str, Any] = OrderedDict()


def shared(kind: str, configs: tuple[Any, ...], build: Callable[[], Built]) -> Built:
    """``build()``'s result for these config dataclasses, built on first use in this process."""
    key = kind + json.dumps([asdict(config) for config in configs], sort_keys=True)
    if key in _STORE:
        _STORE.move_to_end(key)
        return _STORE[key]
    value = build()
    _STORE[key] = value
    while len(_STORE) > LIMIT:
        _STORE.popitem(last=False)
    return value


def clear() -> None:
    _STORE.clear()
