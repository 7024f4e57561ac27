"""Graphs with closed forms: the line graph, the cycle, the path, the grid, and nearest-neighbour
and radius graphs on node positions. Datasets build their native graphs from these; the graph
sources expose them to configs. No config is read here.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from shiftbench.graphs.graph import Graph, symmetrized


def line_graph(nodes: int) -> Graph:
    """The directed line graph ``0 -> 1 -> ... -> nodes-1``: its adjacency is a one-sample delay."""
    import networkx as nx

    return Graph.from_networkx(nx.path_graph(nodes, create_using=nx.DiGraph), name="line")


def cycle_graph(nodes: int) -> Graph:
    """The directed cycle ``0 -> 1 -> ... -> nodes-1 -> 0``: a circular one-sample delay."""
    import networkx as nx

    return Graph.from_networkx(nx.cycle_graph(nodes, create_using=nx.DiGraph), name="cycle")


def path_graph(nodes: int) -> Graph:
    """The undirected path on ``nodes`` nodes (each edge in both directions)."""
    import networkx as nx

    return Graph.from_networkx(nx.path_graph(nodes), name="path")


def grid_graph(rows: int, cols: int) -> Graph:
    """The undirected ``rows x cols`` 4-neighbour grid, nodes in raster order ``r * cols + c``."""
    import networkx as nx

    grid = nx.grid_2d_graph(rows, cols)
    raster = sorted(grid.nodes)
    matrix = nx.to_scipy_sparse_array(grid, nodelist=raster, format="csr")
    positions = np.array([[c, r] for r, c in raster], dtype=np.float32)
    return Graph.from_adjacency(sp.csr_matrix(matrix).T, name="grid", positions=positions)


def knn_graph(positions: np.ndarray, neighbors: int) -> Graph:
    """Each node linked to its ``neighbors`` nearest nodes, symmetrized (an edge either way
    becomes an edge both ways), unit weights.

    Args:
        positions: ``(nodes, dims)`` coordinates.
    """
    from sklearn.neighbors import kneighbors_graph

    directed = kneighbors_graph(positions, n_neighbors=neighbors, mode="connectivity")
    symmetric = symmetrized(directed)
    return Graph.from_adjacency(symmetric, name="knn", positions=positions)


def geometric_graph(positions: np.ndarray, radius: float) -> Graph:
    """Link every two nodes closer than ``radius`` (Euclidean, on positions), unit weights.

    Args:
        positions: ``(nodes, dims)`` coordinates.
    """
    from sklearn.neighbors import radius_neighbors_graph

    linked = radius_neighbors_graph(positions, radius=radius, mode="connectivity", include_self=False)
    return Graph.from_adjacency(symmetrized(linked), name="geometric", positions=positions)
