"""Readouts: from node features to class logits (pooled) or to outputs on every node."""

from __future__ import annotations

import torch
from torch import nn

READOUTS = ("mean", "max", "flatten", "node")
# The readouts that give one output row per signal; ``node`` gives one per node.
POOLED = ("mean", "max", "flatten")


class Readout(nn.Module):
    """Map ``(batch, nodes, channels)`` to logits ``(batch, classes)``, or with ``node`` to
    ``(batch, nodes, classes)``.

    - ``mean``:    ``logits = W mean_n(x_n) + b``   (size independent of ``nodes``)
    - ``max``:     ``logits = W max_n(x_n) + b``    (size independent of ``nodes``)
    - ``flatten``: ``logits = W vec(x) + b``        (``W`` has ``nodes * channels`` columns)
    - ``node``:    ``y_n = W x_n + b`` on every node (size independent of ``nodes``)

    Pooling readouts are invariant to relabelling the nodes, ``node`` is equivariant to it;
    ``flatten`` is neither.
    """

    def __init__(self, kind: str, nodes: int, channels: int, classes: int) -> None:
        super().__init__()
        if kind not in READOUTS:
            raise ValueError(f"unknown readout {kind!r}; accepted: {', '.join(READOUTS)}")
        self.kind = kind
        width = nodes * channels if kind == "flatten" else channels
        self.linear = nn.Linear(width, classes)

    def extra_repr(self) -> str:
        return f"kind={self.kind}"

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        if self.kind == "node":
            return self.linear(x)  # (batch, nodes, channels) -> (batch, nodes, classes)
        if self.kind == "mean":
            pooled = x.mean(dim=1)
        elif self.kind == "max":
            pooled = x.amax(dim=1)
        else:
            pooled = x.flatten(start_dim=1)  # (batch, nodes, channels) -> (batch, nodes * channels)
        return self.linear(pooled)
