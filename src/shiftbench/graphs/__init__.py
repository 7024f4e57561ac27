"""Graphs, the sources that make them, and the shift operators built from them."""

from shiftbench.graphs.graph import Graph, as_graph
from shiftbench.graphs.operators import SCALES, operator_matrix, shift_operator
from shiftbench.graphs.sources import build_graph

__all__ = ["Graph", "as_graph", "SCALES", "build_graph", "operator_matrix", "shift_operator"]
