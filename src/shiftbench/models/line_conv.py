"""The line-graph convolution family (1-D CNN): causal convolutions along the node axis."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import torch
from torch import nn

from shiftbench.config import declared, one_of
from shiftbench.models.readouts import Readout
from shiftbench.models.stack import (
    ConvConfig, FilterStack, per_layer, planned_stack_activations, planned_stack_parameters, widths,
)
from shiftbench.registry import FAMILIES, Family

BOUNDARIES = ("zero", "circular")
# causal: output n sees nodes n-K..n (a polynomial of the directed line graph's delay); same: it
# sees nodes n-floor(K/2)..n+ceil(K/2), as torch's Conv1d(padding="same") and the time-series
# literature's fully convolutional networks have it.
PADDINGS = ("causal", "same")


def causal_convolution(
    x: torch.Tensor, weight: torch.Tensor, bias: torch.Tensor | None, boundary: str, padding: str = "causal"
) -> torch.Tensor:
    """``y_n = sum_{j=0..K} W[:, :, j] x_{n-L+j} + b`` along the node axis, kernel size ``K + 1``,
    with ``L = K`` (``padding: causal``) or ``L = floor(K/2)`` (``same``).

    ``boundary: zero`` takes samples outside the nodes as zero; ``circular`` wraps around
    (``x_{-m} = x_{N-m}``), for any ``K`` and ``N``. Runs as a channels-last Conv2d over the
    ``(batch, channels, 1, nodes)`` view of the input, which is the input's own memory layout and
    measured faster on CPU than Conv1d on ``(batch, channels, nodes)`` (``make bench``).

    Shapes:
        x ``(batch, nodes, in_channels)``, weight ``(out_channels, in_channels, K + 1)``,
        bias ``(out_channels,)`` -> ``(batch, nodes, out_channels)``.
    """
    order = weight.shape[-1] - 1
    before = order if padding == "causal" else order // 2
    if boundary == "zero":
        x = nn.functional.pad(x, (0, 0, before, order - before))
    else:
        nodes = x.shape[1]
        x = x.index_select(1, torch.arange(-before, nodes + order - before, device=x.device) % nodes)
    view = x.contiguous().transpose(1, 2).unsqueeze(2)  # (batch, in, 1, nodes), channels-last in memory
    return nn.functional.conv2d(view, weight.unsqueeze(2), bias).squeeze(2).transpose(1, 2)  # -> (batch, nodes, out)


class CausalConv1d(nn.Module):
    """A convolution along the node axis with a Conv1d's parameters (``self.conv``), causal by
    default: ``y_n = sum_{j=0..K} W[:, :, j] x_{n-L+j} + b``, see :func:`causal_convolution`.

    Shapes:
        input ``(batch, nodes, in_channels)`` -> output ``(batch, nodes, out_channels)``.
    """

    def __init__(
        self, in_channels: int, out_channels: int, order: int, boundary: str = "zero", padding: str = "causal"
    ) -> None:
        super().__init__()
        if boundary not in BOUNDARIES:
            raise ValueError(f"unknown boundary {boundary!r}; accepted: {', '.join(BOUNDARIES)}")
        if padding not in PADDINGS:
            raise ValueError(f"unknown padding {padding!r}; accepted: {', '.join(PADDINGS)}")
        self.order = order
        self.boundary = boundary
        self.padding = padding
        self.conv = nn.Conv1d(in_channels, out_channels, kernel_size=order + 1)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return causal_convolution(x, self.conv.weight, self.conv.bias, self.boundary, self.padding)

    def extra_repr(self) -> str:
        return (f"{self.conv.in_channels}, {self.conv.out_channels}, order={self.order}, padding={self.padding}, "
                f"boundary={self.boundary}")


class LineConv(FilterStack):
    """A stack of Conv1d layers along the node axis (widths ``channels``; causal, or ``same``
    padding), each followed by ``sigma``, then a readout. ``order``: one for every layer, or a
    list with one a layer (kernel sizes ``K_l + 1``). Parameters per layer:
    ``(K_l + 1) * in * out + out``, independent of ``nodes``.

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``, or with the ``node``
        readout ``(batch, nodes, classes)``.
    """

    def __init__(
        self,
        nodes: int,
        features: int,
        channels: Sequence[int],
        classes: int,
        order: int | Sequence[int],
        boundary: str = "zero",
        nonlinearity: str = "relu",
        readout: str = "mean",
        dropout: float = 0.0,
        normalization: str = "none",
        padding: str = "causal",
    ) -> None:
        layers = [
            CausalConv1d(i, o, layer_order, boundary, padding)
            for layer_order, (i, o) in zip(per_layer(order, len(channels)), widths(features, channels))
        ]
        readout_layer = Readout(readout, nodes, channels[-1], classes)
        super().__init__(layers, readout_layer, nonlinearity, dropout, normalization, channels)


@dataclass
class LineConvConfig(ConvConfig):
    """A stack of Conv1d layers with kernel size ``order + 1``: causal (a graph filter on the
    directed line graph computes the same), or ``same`` padding (centred kernels)."""

    family: str = "line_conv"
    boundary: str = declared(one_of(BOUNDARIES), "zero")
    padding: str = declared(one_of(PADDINGS), "causal")


FAMILIES.add(
    Family(
        name="line_conv",
        schema=LineConvConfig,
        display="1-D CNN",
        planned_parameters=planned_stack_parameters,
        planned_activations=planned_stack_activations,
        build=lambda arch, nodes, features, outputs, shift, head: arch.check_head(head) or LineConv(
            nodes, features, arch.channels, outputs, arch.layer_orders(), arch.boundary,
            arch.nonlinearity, arch.readout, arch.dropout, arch.normalization, arch.padding,
        ),
        width_key="channels",
        # The line graph's delay (the cycle's, with a circular boundary) is the shift it uses.
        structure=lambda arch: ("cycle" if arch.boundary == "circular" else "line", "adjacency"),
        marker="^",
    )
)
