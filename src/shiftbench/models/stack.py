"""The shape every convolutional family shares: filter layers, each followed by a pointwise
nonlinearity, then a readout."""

from __future__ import annotations

from collections.abc import Sequence

import torch
from torch import nn

from shiftbench.models.nonlinearities import nonlinearity as make_nonlinearity
from shiftbench.models.readouts import Readout


NORMALIZATIONS = ("none", "batch")


class ChannelBatchNorm(nn.Module):
    """Batch normalization of each channel over the batch and the nodes (torch's BatchNorm1d on
    the ``(batch, channels, nodes)`` view). Shapes: ``(batch, nodes, channels)`` both ways."""

    def __init__(self, channels: int) -> None:
        super().__init__()
        self.norm = nn.BatchNorm1d(channels)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.norm(x.transpose(1, 2)).transpose(1, 2)


class FilterStack(nn.Module):
    """``x_{l+1} = dropout(sigma(N_l(F_l(x_l))))`` for each filter layer ``F_l``, then the
    readout; ``N_l`` is the identity or a per-channel batch normalization.

    Args:
        layers: modules mapping ``(batch, nodes, c_l)`` to ``(batch, nodes, c_{l+1})``.
        readout: maps ``(batch, nodes, c_L)`` to ``(batch, classes)``.
        nonlinearity: name of ``sigma`` (``relu``, ``tanh``, ``leaky_relu``).
        dropout: probability of zeroing an activation during training.
        normalization: ``none`` or ``batch``.
        channels: the output width of each layer.

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``.
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
