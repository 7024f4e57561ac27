"""shiftbench: bench MLPs, 1-D CNNs and graph neural networks on signals on a network's nodes."""

__version__ = "0.1.0"
