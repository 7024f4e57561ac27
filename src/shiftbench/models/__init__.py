"""The families, the graph-filter layer, readouts, and parameter counts. Each family declares
itself in the registry (``arch.family``); :func:`build_model` asks it."""

from __future__ import annotations

from typing import Any

import torch
from torch import nn

from shiftbench.models.fc import FullyConnected
from shiftbench.models.line_conv import CausalConv1d, LineConv
from shiftbench.models.parameters import count_parameters
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer
from shiftbench.models.shift_polynomial_net import ShiftPolynomialNet
from shiftbench.registry import FAMILIES

__all__ = [
    "CausalConv1d",
    "FullyConnected",
    "LineConv",
    "ShiftPolynomialLayer",
    "ShiftPolynomialNet",
    "build_model",
    "count_parameters",
]


def build_model(
    arch: Any, nodes: int, features: int, classes: int, shift: torch.Tensor | None, head: str = "pooled"
) -> nn.Module:
    """The family that ``arch.family`` names, sized for the data; ``shift`` is needed by the
    families that read a graph only. ``head`` ``pooled``: ``classes`` outputs a signal;
    ``nodes``: ``classes`` outputs on every node (the task's head)."""
    family = FAMILIES[arch.family]
    if family.build is None:
        raise ValueError(f"family {arch.family!r} is fitted, not built; use its fit")
    if family.uses_graph and shift is None:
        raise ValueError(f"{arch.family} needs a shift operator")
    return family.build(arch, nodes, features, classes, shift, head)
