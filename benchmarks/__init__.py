"""Benchmarks run by `make bench`; results go to results/benchmarks/."""

import shiftbench  # noqa: F401  its thread policy (OpenMP waiting) applies before torch loads
