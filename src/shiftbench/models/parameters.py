"""Parameter counts: of a built model, and of a family's config before anything is built."""

from __future__ import annotations

from typing import Any

from torch import nn

from shiftbench.errors import ConfigError

# Training keeps four float32 numbers a parameter: the weight, its gradient and Adam's two moments.
TRAINING_BYTES_PER_PARAMETER = 16


def count_parameters(model: nn.Module) -> int:
    """The number of trainable scalars in ``model``."""
    return sum(parameter.numel() for parameter in model.parameters() if parameter.requires_grad)


def planned_parameters(arch: Any, nodes: int, features: int, classes: int) -> int:
    """The count :func:`count_parameters` gives for the model ``arch`` would build, computed
    from the config alone, so a model too large to allocate can be refused first.

    - fc: ``sum_l (w_l + 1) w_{l+1}`` over the widths ``nodes * features, *hidden, classes``.
    - line_conv and graph_conv: ``(K + 1) c_l c_{l+1} + c_{l+1}`` a layer over the widths
      ``features, *channels``, ``2 c_{l+1}`` more with batch normalization, then a readout of
      ``(w + 1) classes`` with ``w = c_L`` (``nodes * c_L`` for ``flatten``).
    """
    if arch.family == "nearest":
        return 0
    if arch.family == "fc":
        sizes = [nodes * features, *arch.hidden, classes]
        return sum((width_in + 1) * width_out for width_in, width_out in zip(sizes[:-1], sizes[1:]))
    sizes = [features, *arch.channels]
    count = 0
    for width_in, width_out in zip(sizes[:-1], sizes[1:]):
        count += (arch.order + 1) * width_in * width_out + width_out
        if arch.normalization == "batch":
            count += 2 * width_out
    readout_width = nodes * sizes[-1] if arch.readout == "flatten" else sizes[-1]
    return count + (readout_width + 1) * classes


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
