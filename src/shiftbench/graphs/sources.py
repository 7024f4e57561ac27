"""Graph sources: the ways shiftbench makes a graph on a dataset's nodes.

Each builder returns a :class:`Graph`; :func:`build_graph` picks one from a graph config.
networkx and scikit-learn do the graph theory; this module only adapts their output.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import networkx as nx
import numpy as np
import scipy.sparse as sp
from sklearn.neighbors import kneighbors_graph, radius_neighbors_graph

from shiftbench.errors import ConfigError
from shiftbench.graphs.files import load_graph_file
from shiftbench.graphs.from_signals import correlation_graph, signal_knn_graph
from shiftbench.graphs.graph import Graph

if TYPE_CHECKING:
    from shiftbench.config import GraphConfig
    from shiftbench.data.dataset import Dataset


def line_graph(nodes: int) -> Graph:
    """The directed line graph ``0 -> 1 -> ... -> nodes-1``: its adjacency is a one-sample delay."""
    return Graph.from_networkx(nx.path_graph(nodes, create_using=nx.DiGraph), name="line")


def cycle_graph(nodes: int) -> Graph:
    """The directed cycle ``0 -> 1 -> ... -> nodes-1 -> 0``: a circular one-sample delay."""
    return Graph.from_networkx(nx.cycle_graph(nodes, create_using=nx.DiGraph), name="cycle")


def path_graph(nodes: int) -> Graph:
    """The undirected path on ``nodes`` nodes (each edge in both directions)."""
    return Graph.from_networkx(nx.path_graph(nodes), name="path")


def grid_graph(rows: int, cols: int) -> Graph:
    """The undirected ``rows x cols`` 4-neighbour grid, nodes in raster order ``r * cols + c``."""
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
    directed = kneighbors_graph(positions, n_neighbors=neighbors, mode="connectivity")
    symmetric = directed.maximum(directed.T)
    return Graph.from_adjacency(symmetric, name="knn", positions=positions)


def geometric_graph(positions: np.ndarray, radius: float) -> Graph:
    """Link every two nodes closer than ``radius`` (Euclidean, on positions), unit weights.

    Args:
        positions: ``(nodes, dims)`` coordinates.
    """
    linked = radius_neighbors_graph(positions, radius=radius, mode="connectivity", include_self=False)
    return Graph.from_adjacency(linked.maximum(linked.T), name="geometric", positions=positions)


def rewired_graph(graph: Graph, swaps_per_edge: float, seed: int) -> Graph:
    """The undirected ``graph`` randomly rewired by degree-preserving double edge swaps
    (networkx's ``double_edge_swap``: ``u-v, x-y -> u-x, v-y``), ``swaps_per_edge`` per edge;
    every node keeps its degree, the structure is scrambled. Weights become 1."""
    if not graph.is_symmetric():
        raise ConfigError(f"graph=rewired needs an undirected native graph, and {graph.name!r} is directed; accepted: data with an undirected native graph")
    simple = graph.to_undirected_simple()
    simple.remove_edges_from(nx.selfloop_edges(simple))
    swap_edges(simple, int(swaps_per_edge * simple.number_of_edges()), seed)
    positions = None if graph.positions is None else graph.positions.numpy()
    return Graph.from_undirected_simple(simple, graph.nodes, "rewired", positions)


def swap_edges(graph: nx.Graph, swaps: int, seed: int) -> None:
    """``swaps`` degree-preserving double edge swaps in place (``u-v, x-y -> u-x, v-y``)."""
    if swaps:
        nx.double_edge_swap(graph, nswap=swaps, max_tries=swaps * 100, seed=seed)


def sbm_graph(nodes: int, blocks: int, p_in: float, p_out: float, seed: int) -> Graph:
    """An undirected stochastic block model: ``blocks`` near-equal blocks of consecutive nodes,
    edge probability ``p_in`` inside a block and ``p_out`` between blocks."""
    sizes = [nodes // blocks + (1 if b < nodes % blocks else 0) for b in range(blocks)]
    probabilities = [[p_in if a == b else p_out for b in range(blocks)] for a in range(blocks)]
    model = nx.stochastic_block_model(sizes, probabilities, seed=seed)
    return Graph.from_networkx(model, name="sbm")


def build_graph(config: GraphConfig, dataset: Dataset) -> Graph:
    """The graph that ``config.source`` names, on ``dataset``'s nodes. Sources learned from
    signals see the training split only."""
    nodes = dataset.nodes
    source = config.source
    positions = dataset.native_graph.positions
    if source == "native":
        return dataset.native_graph
    if source == "line":
        return line_graph(nodes)
    if source == "cycle":
        return cycle_graph(nodes)
    if source == "path":
        return path_graph(nodes)
    if source == "grid":
        return grid_graph(config.rows, config.cols)
    if source == "rewired":
        return rewired_graph(dataset.native_graph, config.swaps_per_edge, config.seed)
    if source == "sbm":
        return sbm_graph(nodes, config.blocks, config.p_in, config.p_out, config.seed)
    if source == "file":
        return load_graph_file(config.path, nodes)
    training_signals = dataset.signals[dataset.splits.train]
    if source == "correlation":
        return correlation_graph(training_signals, config.neighbors)
    if source == "knn":
        if positions is None:
            return signal_knn_graph(training_signals, config.neighbors)
        return knn_graph(positions.numpy(), config.neighbors)
    if source == "geometric":
        if positions is None:
            raise ConfigError(
                f"graph=geometric needs node positions and data {dataset.name!r} has none; "
                "accepted: data with positions (sensor_regimes, digits, a .npz with 'positions')"
            )
        return geometric_graph(positions.numpy(), config.radius)
    raise ValueError(f"unknown graph source {source!r}")
