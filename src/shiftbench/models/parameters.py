"""Parameter counts: of a built model, and of a family's config before anything is built; and
the memory training would take, so that a job that cannot fit is refused before it allocates."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from torch import nn

from shiftbench.errors import ConfigError
from shiftbench.registry import FAMILIES

# Peak memory a parameter takes in training: the weight, its gradient, Adam's two moments,
# Adam's temporaries, the best weights so far and the copy that replaces them, with the heap
# keeping freed blocks as the command line sets it (runtime.keep_freed_memory). Measured for fc
# (2026-12-03): 29 to 33 bytes in the loop alone at 16M to 64M parameters, 22 to 45 in whole
# jobs (the heap reuses more or less of what was freed). `python -m benchmarks.memory` sets the
# estimate beside measured peaks; tests/models/test_memory.py checks that it covers them.
BYTES_PER_PARAMETER = 44
# What a job's first use of its libraries takes whatever its size (kernels, buffers, metrics).
JOB_OVERHEAD_BYTES = 96 * 2**20
# An activation is kept in float32 for the backward pass, and its gradient takes as much.
BYTES_PER_ACTIVATION = 8
# The signals in float32, and the train/validation/test copies training indexes out of them.
DATA_BYTES_PER_NUMBER = 8


def count_parameters(model: nn.Module) -> int:
    """The number of trainable scalars in ``model``."""
    return sum(parameter.numel() for parameter in model.parameters() if parameter.requires_grad)


def planned_parameters(arch: Any, nodes: int, features: int, classes: int, head: str = "pooled") -> int:
    """The count :func:`count_parameters` gives for the model ``arch`` would build (with the
    task's ``head``), computed from the config alone (each family states its formula), so a
    model too large to allocate can be refused first."""
    return FAMILIES[arch.family].planned_parameters(arch, nodes, features, classes, head)


@dataclass(frozen=True)
class MemoryPlan:
    """What training a model would hold at its peak, in bytes, from the config alone:
    ``parameters * 44 + batch * activations_per_sample * 8 + samples * nodes * features * 8``
    plus 96 MiB that any job takes."""

    parameters: int
    parameter_bytes: int
    activation_bytes: int
    data_bytes: int

    @property
    def total(self) -> int:
        return self.parameter_bytes + self.activation_bytes + self.data_bytes + JOB_OVERHEAD_BYTES


def planned_memory(
    arch: Any, nodes: int, features: int, classes: int, batch_size: int, samples: int, head: str = "pooled"
) -> MemoryPlan:
    family = FAMILIES[arch.family]
    count = planned_parameters(arch, nodes, features, classes, head)
    activations = family.planned_activations(arch, nodes, features, classes, head)
    return MemoryPlan(
        parameters=count,
        parameter_bytes=count * BYTES_PER_PARAMETER,
        activation_bytes=min(batch_size, samples) * activations * BYTES_PER_ACTIVATION,
        data_bytes=samples * nodes * features * DATA_BYTES_PER_NUMBER,
    )


def require_memory_for(
    arch: Any, nodes: int, features: int, classes: int, batch_size: int, samples: int, memory_bytes: int,
    head: str = "pooled",
) -> None:
    """Refuse, before anything is allocated, a job whose training would not fit in
    ``memory_bytes``: one line with the estimate and its parts."""
    plan = planned_memory(arch, nodes, features, classes, batch_size, samples, head)
    if plan.total > memory_bytes:
        gb = lambda count: f"{count / 1e9:,.1f} GB"
        raise ConfigError(
            f"arch={arch.family} at {nodes:,} nodes ({plan.parameters:,} parameters, {samples:,} samples) needs "
            f"{gb(plan.total)} to train (parameters {gb(plan.parameter_bytes)}, activations "
            f"{gb(plan.activation_bytes)}, data {gb(plan.data_bytes)}), but {gb(memory_bytes)} of memory is "
            "available; accepted: a job that fits (narrower layers, fewer nodes or samples, a smaller "
            "train.batch_size, or a convolutional family, whose count does not grow with the nodes)"
        )
