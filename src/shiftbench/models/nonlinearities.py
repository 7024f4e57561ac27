"""The pointwise nonlinearities a family may use, by config name."""

from __future__ import annotations

from torch import nn

NONLINEARITIES: dict[str, type[nn.Module]] = {
    "relu": nn.ReLU,
    "tanh": nn.Tanh,
    "leaky_relu": nn.LeakyReLU,
}


def nonlinearity(name: str) -> nn.Module:
    """A fresh module for the nonlinearity called ``name``."""
    return NONLINEARITIES[name]()
