"""Parameter counts: of a built model, and of a family's config before anything is built."""

from __future__ import annotations

from typing import Any

from torch import nn

from shiftbench.errors import ConfigError
from shiftbench.registry import FAMILIES

# Training keeps four float32 numbers a parameter: the weight, its gradient and Adam's two moments.
TRAINING_BYTES_PER_PARAMETER = 16


def count_parameters(model: nn.Module) -> int:
    """The number of trainable scalars in ``model``."""
    return sum(parameter.numel() for parameter in model.parameters() if parameter.requires_grad)


def planned_parameters(arch: Any, nodes: int, features: int, classes: int) -> int:
    """The count :func:`count_parameters` gives for the model ``arch`` would build, computed
    from the config alone (each family states its formula), so a model too large to allocate
    can be refused first."""
    return FAMILIES[arch.family].planned_parameters(arch, nodes, features, classes)


def require_memory_for(arch: Any, nodes: int, features: int, classes: int, memory_bytes: int) -> None:
    """Refuse, before anything is allocated, a model whose training state (weights, gradients
    and optimizer moments) alone would not fit in ``memory_bytes``."""
    count = planned_parameters(arch, nodes, features, classes)
    needed = count * TRAINING_BYTES_PER_PARAMETER
    if needed > memory_bytes:
        raise ConfigError(
            f"arch={arch.family} at {nodes:,} nodes needs {count:,} parameters, {needed / 1e9:,.1f} GB to train "
            f"({TRAINING_BYTES_PER_PARAMETER} bytes a parameter), but {memory_bytes / 1e9:,.1f} GB of memory is "
            "available; accepted: a model that fits (narrower layers, fewer nodes, or a convolutional family, "
            "whose count does not grow with the nodes)"
        )
