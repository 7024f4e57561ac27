"""The fully connected family (MLP)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Optional

import torch
from torch import nn

from shiftbench.config import BUDGET, DROPOUT, Check, Schema, declared, one_of
from shiftbench.models.nonlinearities import NONLINEARITIES
from shiftbench.models.nonlinearities import nonlinearity as make_nonlinearity
from shiftbench.registry import FAMILIES, Family


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


@dataclass
class FcConfig(Schema):
    """The MLP: hidden widths, nonlinearity, dropout."""

    family: str = "fc"
    hidden: list[int] = declared(
        Check(lambda value: all(w >= 1 for w in value), "a list of integers >= 1"), default_factory=lambda: [64]
    )
    nonlinearity: str = declared(one_of(NONLINEARITIES), "relu")
    dropout: float = declared(DROPOUT, 0.0)
    budget: Optional[int] = declared(BUDGET, None)


def planned_fc_parameters(arch: FcConfig, nodes: int, features: int, classes: int) -> int:
    """``sum_l (w_l + 1) w_{l+1}`` over the widths ``nodes * features, *hidden, classes``."""
    sizes = [nodes * features, *arch.hidden, classes]
    return sum((width_in + 1) * width_out for width_in, width_out in zip(sizes[:-1], sizes[1:]))


def planned_fc_activations(arch: FcConfig, nodes: int, features: int, classes: int) -> int:
    """``nodes * features + 2 sum_l w_l + classes``: the flattened input, each hidden layer's
    output and its nonlinearity's, the logits."""
    return nodes * features + 2 * sum(arch.hidden) + classes


FAMILIES.add(
    Family(
        name="fc",
        schema=FcConfig,
        display="MLP",
        planned_parameters=planned_fc_parameters,
        planned_activations=planned_fc_activations,
        build=lambda arch, nodes, features, classes, shift: FullyConnected(
            nodes, features, arch.hidden, classes, arch.nonlinearity, arch.dropout
        ),
        width_key="hidden",
        marker="s",
    )
)
