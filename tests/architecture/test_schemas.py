"""Constraints are declared on schema fields and checked by one generic validator
(``config.Schema``); schemas add only checks that involve several fields (common practice, no source)."""

from dataclasses import dataclass

import pytest

from shiftbench.config import Schema, TrainConfig, at_least, declared, one_of
from shiftbench.errors import ConfigError
from shiftbench.registry import DATASETS, FAMILIES, GRAPH_SOURCES


def schemas() -> list[type]:
    return [TrainConfig, *{entry.schema for registry in (DATASETS, GRAPH_SOURCES, FAMILIES) for entry in registry}]


def test_no_schema_writes_its_own_field_checks():
    for schema in schemas():
        for cls in schema.__mro__:
            if cls is not Schema and cls.__module__.startswith("shiftbench"):
                assert "__post_init__" not in vars(cls), f"{cls.__name__} checks fields outside the declared constraints"


def test_the_generic_validator_writes_the_one_line_refusal():
    @dataclass
    class Toy(Schema):
        width: int = declared(at_least(1), 4)
        kind: str = declared(one_of(("a", "b")), "a")

    assert Toy().width == 4
    with pytest.raises(ConfigError, match=r"^width=0 is not accepted; accepted: an integer >= 1$"):
        Toy(width=0)
    with pytest.raises(ConfigError, match=r"^kind='c' is not accepted; accepted: one of a, b$"):
        Toy(kind="c")
