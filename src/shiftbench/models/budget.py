"""Parameter budgets: size a family's widths so its trainable count lands near a target.

The widths keep their configured shape (``hidden`` or ``channels``) and are scaled by one
factor ``s``: ``width_i = max(1, round(s * base_i))``. The count never falls as ``s`` grows,
so bisection on ``s`` finds the two sizes around the budget, and the closer one is kept.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

from shiftbench.models.parameters import planned_parameters
from shiftbench.registry import FAMILIES

# How far from the budget a sized network may land, as a share of the budget.
TOLERANCE = 0.05


def width_key(family: str) -> str:
    """The config key whose widths ``arch.budget`` scales."""
    key = FAMILIES[family].width_key
    if key is None:
        raise BudgetError(f"arch.budget is not accepted for arch={family}; accepted: a family with widths")
    return key


class BudgetError(RuntimeError):
    """No widths of this shape reach the budget within the tolerance."""


def _scaled(arch: Any, scale: float) -> Any:
    key = width_key(arch.family)
    return replace(arch, **{key: [max(1, round(scale * width)) for width in getattr(arch, key)]})


def fit_budget(arch: Any, budget: int, nodes: int, features: int, classes: int, head: str = "pooled") -> tuple[Any, int]:
    """The arch config with widths scaled to ``budget`` parameters, and the count it has.

    Raises:
        BudgetError: when even width 1 everywhere exceeds the budget, or the nearest size is more
            than 5% away; the message says which and by how much.
    """
    key = width_key(arch.family)
    smallest = _scaled(arch, 0.0)
    least = planned_parameters(smallest, nodes, features, classes, head)
    if least > budget * (1 + TOLERANCE):
        raise BudgetError(
            f"arch.budget={budget} cannot be met: {arch.family} with {key}={getattr(smallest, key)} already has "
            f"{least:,} parameters at {nodes} nodes; accepted: a budget of at least {least:,}"
        )
    low, high = 0.0, 1.0
    while planned_parameters(_scaled(arch, high), nodes, features, classes, head) < budget:
        low, high = high, high * 2
    for _ in range(40):
        middle = (low + high) / 2
        if planned_parameters(_scaled(arch, middle), nodes, features, classes, head) < budget:
            low = middle
        else:
            high = middle
    candidates = [(planned_parameters(_scaled(arch, scale), nodes, features, classes, head), scale) for scale in (low, high)]
    count, scale = min(candidates, key=lambda pair: abs(pair[0] - budget))
    if abs(count - budget) > TOLERANCE * budget:
        raise BudgetError(
            f"arch.budget={budget} cannot be met within 5%: the nearest {arch.family} with {key} shaped like "
            f"{getattr(arch, key)} has {count:,} parameters"
        )
    return _scaled(arch, scale), count
