"""Parameter counts: the one function every report and budget uses."""

from __future__ import annotations

from torch import nn


def count_parameters(model: nn.Module) -> int:
    """The number of trainable scalars in ``model``."""
    return sum(parameter.numel() for parameter in model.parameters() if parameter.requires_grad)
