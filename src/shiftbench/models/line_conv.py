"""The line-graph convolution family (1-D CNN) built on torch's Conv1d."""

from __future__ import annotations

from collections.abc import Sequence

import torch
from torch import nn

from shiftbench.models.readouts import Readout
from shiftbench.models.stack import FilterStack, widths

BOUNDARIES = ("zero", "circular")


class CausalConv1d(nn.Module):
    """A causal convolution along the node axis:
    ``y_n = sum_{j=0..K} W[:, :, j] x_{n-K+j} + b``, kernel size ``K + 1``.

    ``boundary: zero`` pads ``K`` zeros on the left (samples before the first node are zero);
    ``circular`` wraps around (``x_{-m} = x_{N-m}``), for any ``K`` and ``N``.

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
        x = x.transpose(1, 2)
        if self.boundary == "zero":
            x = nn.functional.pad(x, (self.order, 0))
        else:
            nodes = x.shape[-1]
            wrapped = torch.arange(-self.order, nodes, device=x.device) % nodes
            x = x.index_select(-1, wrapped)
        return self.conv(x).transpose(1, 2)


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
