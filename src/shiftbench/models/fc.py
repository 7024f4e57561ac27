"""The fully connected family (MLP)."""

from __future__ import annotations

from collections.abc import Sequence

import torch
from torch import nn

from shiftbench.models.nonlinearities import nonlinearity as make_nonlinearity


class FullyConnected(nn.Module):
    """An MLP on the flattened signal:
    ``z_0 = vec(x)``, ``z_{l+1} = dropout(sigma(W_l z_l + b_l))``, ``logits = W_L z_L + b_L``.

    Its first layer has ``nodes * features * hidden[0]`` weights: it grows with the signal's size.

    Shapes:
        input ``(batch, nodes, features)`` -> logits ``(batch, classes)``.
    """

    def __init__(
        self,
        nodes: int,
        features: int,
        hidden: Sequence[int],
        classes: int,
        nonlinearity: str = "relu",
        dropout: float = 0.0,
    ) -> None:
        super().__init__()
        sizes = [nodes * features, *hidden]
        layers: list[nn.Module] = []
        for width_in, width_out in zip(sizes[:-1], sizes[1:]):
            layers += [nn.Linear(width_in, width_out), make_nonlinearity(nonlinearity), nn.Dropout(dropout)]
        layers.append(nn.Linear(sizes[-1], classes))
        self.network = nn.Sequential(nn.Flatten(start_dim=1), *layers)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.network(x)
