"""shiftbench: bench MLPs, 1-D CNNs and graph neural networks on signals on a network's nodes."""

import os

__version__ = "0.1.0"

# OpenMP threads that spin at every barrier stall when other work shares the cores: measured on
# 2 cores beside busy processes, the k-NN layer took 4x longer with spinning threads than with
# sleeping ones, which lose little on an idle machine (benchmarks/contention.py has both). The
# policy is read when torch loads its OpenMP runtime, so it is set here, before any module of the
# package imports torch; a user's own OMP_WAIT_POLICY wins.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
