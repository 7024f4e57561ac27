"""The shape every convolutional family shares: filter layers, each followed by a pointwise
nonlinearity, then a readout."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Optional

import torch
from torch import nn

from shiftbench.config import BUDGET, DROPOUT, Check, Schema, at_least, declared, one_of, require
from shiftbench.models.nonlinearities import NONLINEARITIES
from shiftbench.models.nonlinearities import nonlinearity as make_nonlinearity
from shiftbench.models.readouts import POOLED, READOUTS, Readout


NORMALIZATIONS = ("none", "batch")


class ChannelBatchNorm(nn.Module):
    """Batch normalization of each channel over the batch and the nodes (torch's BatchNorm1d on
    the ``(batch, channels, nodes)`` view). Shapes: ``(batch, nodes, channels)`` both ways."""

    def __init__(self, channels: int) -> None:
        super().__init__()
        self.norm = nn.BatchNorm1d(channels)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.norm(x.transpose(1, 2)).transpose(1, 2)  # via (batch, channels, nodes)


class FilterStack(nn.Module):
    """``x_{l+1} = dropout(sigma(N_l(F_l(x_l))))`` for each filter layer ``F_l``, then the
    readout; ``N_l`` is the identity or a per-channel batch normalization.

    Args:
        layers: modules mapping ``(batch, nodes, c_l)`` to ``(batch, nodes, c_{l+1})``.
        readout: maps ``(batch, nodes, c_L)`` to ``(batch, classes)`` (``node``: ``(batch, nodes, classes)``).
        nonlinearity: name of ``sigma`` (``relu``, ``tanh``, ``leaky_relu``).
        dropout: probability of zeroing an activation during training.
        normalization: ``none`` or ``batch``.
        channels: the output width of each layer.

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``, or with the ``node``
        readout ``(batch, nodes, classes)``.
    """

    def __init__(
        self,
        layers: Sequence[nn.Module],
        readout: Readout,
        nonlinearity: str,
        dropout: float,
        normalization: str,
        channels: Sequence[int],
    ) -> None:
        super().__init__()
        if normalization not in NORMALIZATIONS:
            raise ValueError(f"unknown normalization {normalization!r}; accepted: {', '.join(NORMALIZATIONS)}")
        self.layers = nn.ModuleList(layers)
        self.nonlinearity = nonlinearity
        self.normalization = normalization
        self.norms = nn.ModuleList(
            ChannelBatchNorm(width) if normalization == "batch" else nn.Identity() for width in channels
        )
        self.activation = make_nonlinearity(nonlinearity)
        self.dropout = nn.Dropout(dropout)
        self.readout = readout

    def features(self, x: torch.Tensor) -> torch.Tensor:
        """The node features before the readout: ``(batch, nodes, c_L)``."""
        for layer, norm in zip(self.layers, self.norms):
            x = self.dropout(self.activation(norm(layer(x))))
        return x

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.readout(self.features(x))


def widths(features: int, channels: Sequence[int]) -> list[tuple[int, int]]:
    """``(in, out)`` widths of each layer of a stack fed ``features`` and sized by ``channels``."""
    sizes = [features, *channels]
    return list(zip(sizes[:-1], sizes[1:]))


def per_layer(order: int | Sequence[int], layers: int) -> list[int]:
    """The filter order of each of ``layers`` layers: ``order`` repeated, or the list as given
    (it must have one entry a layer)."""
    if isinstance(order, int):
        return [order] * layers
    if len(order) != layers:
        raise ValueError(f"orders={list(order)!r} is not accepted; accepted: one order a layer ({layers})")
    return list(order)


@dataclass
class ConvConfig(Schema):
    """What the convolutional families share: ``order`` (or ``orders``, one a layer), widths
    ``channels``, the nonlinearity, the readout, dropout, normalization, and an optional
    parameter budget. With ``orders`` set, ``order`` becomes their largest (the highest power in
    the stack), so records and tables keep one number a run."""

    family: str = "graph_conv"
    order: int = declared(at_least(0), 3)
    channels: list[int] = declared(
        Check(lambda value: len(value) >= 1 and all(c >= 1 for c in value), "a non-empty list of integers >= 1"),
        default_factory=lambda: [16, 16],
    )
    nonlinearity: str = declared(one_of(NONLINEARITIES), "relu")
    readout: str = declared(one_of(READOUTS), "mean")
    dropout: float = declared(DROPOUT, 0.0)
    normalization: str = declared(one_of(NORMALIZATIONS), "none")
    budget: Optional[int] = declared(BUDGET, None)
    orders: Optional[list[int]] = declared(
        Check(lambda value: value is None or (len(value) >= 1 and all(order >= 0 for order in value)),
              "null (order for every layer) or a list of integers >= 0, one a layer"),
        None,
    )

    def check(self) -> None:
        if self.orders is not None:
            require("orders", self.orders, len(self.orders) == len(self.channels),
                    f"one order a layer: {len(self.channels)} values, as channels has")
            self.order = max(self.orders)

    def check_head(self, head: str) -> None:
        """A one-line error unless the readout gives the task's ``head``: ``node`` for a task
        on every node (``nodes``), a pooling readout for one on whole signals (``pooled``)."""
        wanted = ("node",) if head == "nodes" else POOLED
        what = "a value on every node" if head == "nodes" else "one value per signal"
        require("arch.readout", self.readout, self.readout in wanted, f"{', '.join(wanted)} for a task that predicts {what}")

    def layer_orders(self) -> list[int]:
        """The filter order of each layer."""
        return per_layer(self.order if self.orders is None else self.orders, len(self.channels))


def planned_stack_activations(arch: ConvConfig, nodes: int, features: int, classes: int, head: str) -> int:
    """``nodes * (features + 3 sum_l c_{l+1})``: the input, and per layer the filter's output,
    the nonlinearity's and a temporary of the backward pass, each ``(nodes, c_{l+1})`` (the
    filter's own backward recomputes its partial sums instead of keeping them); set beside
    measured peaks by ``benchmarks/memory.py``."""
    return nodes * (features + 3 * sum(width_out for _, width_out in widths(features, arch.channels)))


def planned_stack_parameters(arch: ConvConfig, nodes: int, features: int, classes: int, head: str) -> int:
    """``(K_l + 1) c_l c_{l+1} + c_{l+1}`` a layer over the widths ``features, *channels``,
    ``2 c_{l+1}`` more with batch normalization, then a readout of ``(w + 1) classes`` with
    ``w = c_L`` (``nodes * c_L`` for ``flatten``; the ``node`` readout of a node head is the
    same per-node map, so no count depends on ``nodes`` but flatten's)."""
    count = 0
    for order, (width_in, width_out) in zip(arch.layer_orders(), widths(features, arch.channels)):
        count += (order + 1) * width_in * width_out + width_out
        if arch.normalization == "batch":
            count += 2 * width_out
    last = arch.channels[-1]
    readout_width = nodes * last if arch.readout == "flatten" else last
    return count + (readout_width + 1) * classes
