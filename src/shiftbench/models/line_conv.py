"""The line-graph convolution family (1-D CNN): causal convolutions along the node axis."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import torch
from torch import nn

from shiftbench.config import declared, one_of
from shiftbench.models.readouts import Readout
from shiftbench.models.stack import ConvConfig, FilterStack, planned_stack_activations, planned_stack_parameters, widths
from shiftbench.registry import FAMILIES, Family

BOUNDARIES = ("zero", "circular")


def causal_convolution(x: torch.Tensor, weight: torch.Tensor, bias: torch.Tensor | None, boundary: str) -> torch.Tensor:
    """``y_n = sum_{j=0..K} W[:, :, j] x_{n-K+j} + b`` along the node axis, kernel size ``K + 1``.

    ``boundary: zero`` takes samples before the first node as zero; ``circular`` wraps around
    (``x_{-m} = x_{N-m}``), for any ``K`` and ``N``. Runs as a channels-last Conv2d over the
    ``(batch, channels, 1, nodes)`` view of the input, which is the input's own memory layout and
    measured faster on CPU than Conv1d on ``(batch, channels, nodes)`` (``make bench``).

    Shapes:
        x ``(batch, nodes, in_channels)``, weight ``(out_channels, in_channels, K + 1)``,
        bias ``(out_channels,)`` -> ``(batch, nodes, out_channels)``.
    """
    order = weight.shape[-1] - 1
    if boundary == "zero":
        x = nn.functional.pad(x, (0, 0, order, 0))
    else:
        nodes = x.shape[1]
        x = x.index_select(1, torch.arange(-order, nodes, device=x.device) % nodes)
    view = x.contiguous().transpose(1, 2).unsqueeze(2)  # (batch, in, 1, nodes), channels-last in memory
    return nn.functional.conv2d(view, weight.unsqueeze(2), bias).squeeze(2).transpose(1, 2)  # -> (batch, nodes, out)


class CausalConv1d(nn.Module):
    """A causal convolution along the node axis with a Conv1d's parameters (``self.conv``):
    ``y_n = sum_{j=0..K} W[:, :, j] x_{n-K+j} + b``, see :func:`causal_convolution`.

    Shapes:
        input ``(batch, nodes, in_channels)`` -> output ``(batch, nodes, out_channels)``.
    """

    def __init__(self, in_channels: int, out_channels: int, order: int, boundary: str = "zero") -> None:
        super().__init__()
        if boundary not in BOUNDARIES:
            raise ValueError(f"unknown boundary {boundary!r}; accepted: {', '.join(BOUNDARIES)}")
        self.order = order
        self.boundary = boundary
        self.conv = nn.Conv1d(in_channels, out_channels, kernel_size=order + 1)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return causal_convolution(x, self.conv.weight, self.conv.bias, self.boundary)

    def extra_repr(self) -> str:
        return f"{self.conv.in_channels}, {self.conv.out_channels}, order={self.order}, causal, boundary={self.boundary}"


class LineConv(FilterStack):
    """A stack of causal Conv1d layers (widths ``channels``), each followed by ``sigma``, then a
    readout. Parameters per layer: ``(K + 1) * in * out + out``, independent of ``nodes``.

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``.
    """

    def __init__(
        self,
        nodes: int,
        features: int,
        channels: Sequence[int],
        classes: int,
        order: int,
        boundary: str = "zero",
        nonlinearity: str = "relu",
        readout: str = "mean",
        dropout: float = 0.0,
        normalization: str = "none",
    ) -> None:
        layers = [CausalConv1d(i, o, order, boundary) for i, o in widths(features, channels)]
        readout_layer = Readout(readout, nodes, channels[-1], classes)
        super().__init__(layers, readout_layer, nonlinearity, dropout, normalization, channels)


@dataclass
class LineConvConfig(ConvConfig):
    """A stack of causal Conv1d layers with kernel size ``order + 1``."""

    family: str = "line_conv"
    boundary: str = declared(one_of(BOUNDARIES), "zero")


FAMILIES.add(
    Family(
        name="line_conv",
        schema=LineConvConfig,
        display="1-D CNN",
        planned_parameters=planned_stack_parameters,
        planned_activations=planned_stack_activations,
        build=lambda arch, nodes, features, classes, shift: LineConv(
            nodes, features, arch.channels, classes, arch.order, arch.boundary,
            arch.nonlinearity, arch.readout, arch.dropout, arch.normalization,
        ),
        width_key="channels",
        # The line graph's delay (the cycle's, with a circular boundary) is the shift it uses.
        structure=lambda arch: ("cycle" if arch.boundary == "circular" else "line", "adjacency"),
        marker="^",
    )
)
