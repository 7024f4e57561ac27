"""The fully connected family (MLP)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Optional

import torch
from omegaconf import ListConfig
from torch import nn

from shiftbench.config import BUDGET, Check, Schema, declared, one_of, require
from shiftbench.models.nonlinearities import NONLINEARITIES
from shiftbench.models.nonlinearities import nonlinearity as make_nonlinearity
from shiftbench.registry import FAMILIES, Family


class FullyConnected(nn.Module):
    """An MLP on the flattened signal:
    ``z_0 = vec(x)``, ``z_{l+1} = sigma(W_l dropout_l(z_l) + b_l)``, ``y = W_L dropout_L(z_L) + b_L``.

    ``dropout``: the rate before each linear map, a list of ``len(hidden) + 1``; a number ``p``
    means none on the input and ``p`` before every later map.

    Its first layer has ``nodes * features * hidden[0]`` weights: it grows with the signal's size.
    With ``head="nodes"`` its last layer has ``nodes * outputs`` units, read as ``outputs`` on
    every node, so that layer grows with the nodes too.

    Shapes:
        input ``(batch, nodes, features)`` -> ``(batch, outputs)`` (``head="pooled"``: class
        logits) or ``(batch, nodes, outputs)`` (``head="nodes"``).
    """

    def __init__(
        self,
        nodes: int,
        features: int,
        hidden: Sequence[int],
        outputs: int,
        nonlinearity: str = "relu",
        dropout: float | Sequence[float] = 0.0,
        head: str = "pooled",
    ) -> None:
        super().__init__()
        self.shape = (nodes, outputs) if head == "nodes" else (outputs,)
        sizes = [nodes * features, *hidden]
        rates = dropout_rates(dropout, len(hidden))
        layers: list[nn.Module] = [nn.Flatten(start_dim=1)]
        if rates[0] > 0:
            layers.append(nn.Dropout(rates[0]))
        for rate, width_in, width_out in zip(rates[1:], sizes[:-1], sizes[1:]):
            layers += [nn.Linear(width_in, width_out), make_nonlinearity(nonlinearity), nn.Dropout(rate)]
        layers.append(nn.Linear(sizes[-1], math.prod(self.shape)))
        self.network = nn.Sequential(*layers)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.network(x).view(len(x), *self.shape)


def dropout_rates(dropout: float | Sequence[float], hidden_layers: int) -> list[float]:
    """The dropout rate before each of the ``hidden_layers + 1`` linear maps."""
    if isinstance(dropout, (int, float)):
        return [0.0] + [float(dropout)] * hidden_layers
    return [float(rate) for rate in dropout]


def _rates_ok(value: Any) -> bool:
    values = value if isinstance(value, (list, tuple, ListConfig)) else [value]
    return all(isinstance(rate, (int, float)) and not isinstance(rate, bool) and 0.0 <= rate < 1.0 for rate in values)


@dataclass
class FcConfig(Schema):
    """The MLP: hidden widths, nonlinearity, dropout (a number, or one rate before each linear
    map: ``len(hidden) + 1`` of them)."""

    family: str = "fc"
    hidden: list[int] = declared(
        Check(lambda value: all(w >= 1 for w in value), "a list of integers >= 1"), default_factory=lambda: [64]
    )
    nonlinearity: str = declared(one_of(NONLINEARITIES), "relu")
    dropout: Any = declared(Check(_rates_ok, "a probability in [0, 1), or a list of them (one before each linear map)"), 0.0)
    budget: Optional[int] = declared(BUDGET, None)

    def check(self) -> None:
        if not isinstance(self.dropout, (int, float)):
            self.dropout = [float(rate) for rate in self.dropout]
            require("dropout", self.dropout, len(self.dropout) == len(self.hidden) + 1,
                    f"one rate before each linear map: {len(self.hidden) + 1} values")


def output_units(nodes: int, outputs: int, head: str) -> int:
    """The last layer's width: ``outputs``, or ``nodes * outputs`` for a node head."""
    return nodes * outputs if head == "nodes" else outputs


def planned_fc_parameters(arch: FcConfig, nodes: int, features: int, outputs: int, head: str) -> int:
    """``sum_l (w_l + 1) w_{l+1}`` over the widths ``nodes * features, *hidden, u`` with ``u``
    the outputs (``nodes * outputs`` for a node head)."""
    sizes = [nodes * features, *arch.hidden, output_units(nodes, outputs, head)]
    return sum((width_in + 1) * width_out for width_in, width_out in zip(sizes[:-1], sizes[1:]))


def planned_fc_activations(arch: FcConfig, nodes: int, features: int, outputs: int, head: str) -> int:
    """``nodes * features + 2 sum_l w_l + u``: the flattened input, each hidden layer's
    output and its nonlinearity's, the outputs."""
    return nodes * features + 2 * sum(arch.hidden) + output_units(nodes, outputs, head)


FAMILIES.add(
    Family(
        name="fc",
        schema=FcConfig,
        display="MLP",
        planned_parameters=planned_fc_parameters,
        planned_activations=planned_fc_activations,
        build=lambda arch, nodes, features, outputs, shift, head: FullyConnected(
            nodes, features, arch.hidden, outputs, arch.nonlinearity, arch.dropout, head
        ),
        width_key="hidden",
        marker="s",
    )
)
