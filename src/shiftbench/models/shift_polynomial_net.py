"""The arbitrary-graph convolution family (GNN of polynomial graph filters)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import torch

from shiftbench.models.readouts import Readout
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer
from shiftbench.models.stack import (
    ConvConfig, FilterStack, per_layer, planned_stack_activations, planned_stack_parameters, widths,
)
from shiftbench.registry import FAMILIES, Family


class ShiftPolynomialNet(FilterStack):
    """A stack of graph-filter layers ``X_{l+1} = sigma(sum_k S^k X_l H_{l,k} + b_l)`` (widths
    ``channels``), then a readout. ``order``: one for every layer, or a list with one a layer.
    Parameters per layer: ``(K_l + 1) * in * out + out``, independent of ``nodes``.

    Args:
        shift: ``(nodes, nodes)`` sparse shift operator ``S``, shared by every layer.
        structured: let the layers use a structured plan where ``S`` has one (see
            :class:`ShiftPolynomialLayer`).

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``, or with the ``node``
        readout ``(batch, nodes, classes)``.
    """

    def __init__(
        self,
        shift: torch.Tensor,
        features: int,
        channels: Sequence[int],
        classes: int,
        order: int | Sequence[int],
        nonlinearity: str = "relu",
        readout: str = "mean",
        dropout: float = 0.0,
        normalization: str = "none",
        structured: bool = True,
    ) -> None:
        nodes = shift.shape[0]
        layers = [
            ShiftPolynomialLayer(shift, i, o, layer_order, structured=structured)
            for layer_order, (i, o) in zip(per_layer(order, len(channels)), widths(features, channels))
        ]
        readout_layer = Readout(readout, nodes, channels[-1], classes)
        super().__init__(layers, readout_layer, nonlinearity, dropout, normalization, channels)


@dataclass
class GraphConvConfig(ConvConfig):
    """A stack of graph filters of order ``order``, widths ``channels``, on the configured graph."""

    family: str = "graph_conv"


def _build(
    arch: GraphConvConfig, nodes: int, features: int, classes: int, shift: torch.Tensor, head: str
) -> ShiftPolynomialNet:
    arch.check_head(head)
    return ShiftPolynomialNet(
        shift, features, arch.channels, classes, arch.layer_orders(),
        arch.nonlinearity, arch.readout, arch.dropout, arch.normalization,
    )


FAMILIES.add(
    Family(
        name="graph_conv",
        schema=GraphConvConfig,
        display="GNN",
        planned_parameters=planned_stack_parameters,
        planned_activations=planned_stack_activations,
        build=_build,
        width_key="channels",
        uses_graph=True,
        marker="o",
    )
)
