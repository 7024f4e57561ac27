"""The three families, the graph-filter layer, readouts, and parameter counts."""

from __future__ import annotations

from typing import TYPE_CHECKING

import torch
from torch import nn

from shiftbench.models.fc import FullyConnected
from shiftbench.models.graph_conv import GraphConv
from shiftbench.models.graph_filter import GraphFilter
from shiftbench.models.line_conv import CausalConv1d, LineConv
from shiftbench.models.parameters import count_parameters

if TYPE_CHECKING:
    from shiftbench.config import FcConfig, GraphConvConfig

__all__ = [
    "CausalConv1d",
    "FullyConnected",
    "GraphConv",
    "GraphFilter",
    "LineConv",
    "build_model",
    "count_parameters",
]


def build_model(
    arch: FcConfig | GraphConvConfig, nodes: int, features: int, classes: int, shift: torch.Tensor | None
) -> nn.Module:
    """The family that ``arch.family`` names, sized for the data; ``shift`` is needed by
    ``graph_conv`` only."""
    if arch.family == "fc":
        return FullyConnected(nodes, features, arch.hidden, classes, arch.nonlinearity, arch.dropout)
    if arch.family == "line_conv":
        return LineConv(
            nodes, features, arch.channels, classes, arch.order, arch.boundary,
            arch.nonlinearity, arch.readout, arch.dropout, arch.normalization,
        )
    if arch.family == "graph_conv":
        if shift is None:
            raise ValueError("graph_conv needs a shift operator")
        return GraphConv(
            shift, features, arch.channels, classes, arch.order,
            arch.nonlinearity, arch.readout, arch.dropout, arch.normalization,
        )
    raise ValueError(f"unknown family {arch.family!r}")
