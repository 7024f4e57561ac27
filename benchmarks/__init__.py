"""Benchmarks run by `make bench`; results go to results/benchmarks/."""
