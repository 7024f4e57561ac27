"""A sweep's axes: which keys a command line (and a study) sweeps over, and how many jobs that
makes. Read by the pre-launch check and by the sweep progress display, which must not load the
job runner to count jobs."""

from __future__ import annotations

import math

from hydra.core.override_parser.overrides_parser import OverridesParser


def _line(key: str, value: str) -> str:
    return f"{key}={value}"


def split_overrides(overrides: list[str]) -> tuple[dict[str, list[str]], list[str]]:
    """Sweep axes (key -> its ``key=value`` lines) and the fixed overrides of a command line."""
    axes: dict[str, list[str]] = {}
    fixed: list[str] = []
    for override in OverridesParser.create().parse_overrides(overrides):
        key = override.get_key_element()
        if override.is_sweep_override():
            axes[key] = [_line(key, value) for value in override.sweep_string_iterator()]
        else:
            fixed.append(override.input_line)
    return axes, fixed


def add_study_axes(axes: dict[str, list[str]], fixed: list[str], study_params: dict) -> None:
    """Add a study's ``hydra.sweeper.params`` axes that the command line does not override."""
    given = {key.lstrip("+~") for key in axes} | {line.split("=", 1)[0].lstrip("+~") for line in fixed}
    for key, values in study_params.items():
        if key.lstrip("+~") not in given:
            (override,) = OverridesParser.create().parse_overrides([_line(key, str(values))])
            axes[key] = [_line(key, value) for value in override.sweep_string_iterator()]


def count_jobs(task_overrides: list[str], study_params: dict) -> int:
    """How many jobs a sweep launches: the product of its axes' lengths."""
    axes, fixed = split_overrides(task_overrides)
    add_study_axes(axes, fixed, study_params)
    return math.prod(len(values) for values in axes.values())


