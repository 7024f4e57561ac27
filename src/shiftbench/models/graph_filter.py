"""The graph-filter layer: a polynomial of the shift operator with matrix taps."""

from __future__ import annotations

import math

import torch
from torch import nn


class GraphFilter(nn.Module):
    """``Y = sum_{k=0..K} S^k X H_k + b`` for a whole batch.

    The taps ``H_k`` are ``(in_channels, out_channels)`` matrices, one per power of ``S``. The
    products are ordered to move the least data: all taps are applied in one dense product
    ``X [H_0 .. H_K]``, then Horner's rule ``Y_K = X H_K``, ``Y_k = S Y_{k+1} + X H_k`` leaves
    ``K`` sparse products, each on the batch folded into the columns of a
    ``(nodes, batch * out_channels)`` matrix. No graph is ever copied per sample.

    Args:
        shift: ``(nodes, nodes)`` sparse (CSR or COO) or dense shift operator ``S``.
        in_channels, out_channels: feature widths of ``X`` and ``Y``.
        order: ``K``, the highest power of ``S`` (``K + 1`` taps).
        bias: add a learned ``b`` of shape ``(out_channels,)``.

    Shapes:
        input ``(batch, nodes, in_channels)`` -> output ``(batch, nodes, out_channels)``.
    """

    def __init__(
        self, shift: torch.Tensor, in_channels: int, out_channels: int, order: int, bias: bool = True
    ) -> None:
        super().__init__()
        self.in_channels = in_channels
        self.out_channels = out_channels
        self.order = order
        # The graph is data, not a learned weight: keep it out of the state dict.
        self.register_buffer("shift", shift, persistent=False)
        self.taps = nn.Parameter(torch.empty(order + 1, in_channels, out_channels))
        self.bias = nn.Parameter(torch.empty(out_channels)) if bias else None
        self.reset_parameters()

    def reset_parameters(self) -> None:
        """Uniform in ``+-1/sqrt(fan_in)`` with ``fan_in = in_channels * (K + 1)``, as torch's
        Conv1d initialises a kernel of size ``K + 1``."""
        bound = 1.0 / math.sqrt(self.in_channels * (self.order + 1))
        nn.init.uniform_(self.taps, -bound, bound)
        if self.bias is not None:
            nn.init.uniform_(self.bias, -bound, bound)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        batch, nodes, _ = x.shape
        taps = self.order + 1
        # (nodes, batch, in) @ (in, taps * out) -> (taps, nodes, batch * out), one copy.
        weights = self.taps.permute(1, 0, 2).reshape(self.in_channels, taps * self.out_channels)
        mixed = (x.transpose(0, 1) @ weights).reshape(nodes, batch, taps, self.out_channels)
        mixed = mixed.permute(2, 0, 1, 3).reshape(taps, nodes, batch * self.out_channels)
        y = mixed[self.order]
        for k in range(self.order - 1, -1, -1):
            y = self.shift @ y + mixed[k]
        y = y.reshape(nodes, batch, self.out_channels).transpose(0, 1)
        return y if self.bias is None else y + self.bias

    def extra_repr(self) -> str:
        return f"{self.in_channels}, {self.out_channels}, order={self.order}, bias={self.bias is not None}"
