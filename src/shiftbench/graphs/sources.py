"""Graph sources: the ways shiftbench makes a graph on a dataset's nodes, each declared here with
its config schema (``graph.source``). networkx and scikit-learn do the graph theory; this module
only adapts their output. Sources learned from signals live in :mod:`from_signals`, the user's
graph files in :mod:`files`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import scipy.sparse as sp

from shiftbench.config import PROBABILITY, POSITIVE, at_least, declared
from shiftbench.errors import ConfigError
from shiftbench.graphs.from_signals import NeighborsGraphConfig, signal_knn_graph
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import GraphConfig
from shiftbench.graphs.standard import cycle_graph, geometric_graph, grid_graph, knn_graph, line_graph, path_graph
from shiftbench.registry import GRAPH_SOURCES, GraphSource

if TYPE_CHECKING:
    import networkx as nx

if TYPE_CHECKING:
    from shiftbench.data.dataset import Dataset


def simple_graph(graph: Graph) -> nx.Graph | nx.DiGraph:
    """``graph``'s edges without weights or self-loops: an undirected networkx graph when every
    edge goes both ways, else a directed one."""
    import networkx as nx

    simple = graph.to_undirected_simple() if graph.is_symmetric() else nx.DiGraph(graph.to_networkx())
    simple.remove_edges_from(nx.selfloop_edges(simple))
    return simple


def from_simple(simple: nx.Graph | nx.DiGraph, graph: Graph, name: str) -> Graph:
    """The inverse of :func:`simple_graph` on ``graph``'s nodes and positions: unit weights."""
    import networkx as nx

    positions = None if graph.positions is None else graph.positions.numpy()
    if not simple.is_directed():
        return Graph.from_undirected_simple(simple, graph.nodes, name, positions)
    matrix = nx.to_scipy_sparse_array(simple, nodelist=range(graph.nodes), weight=None, format="csr")
    return Graph.from_adjacency(sp.csr_matrix(matrix.T), name=name, positions=positions)  # networkx rows are sources


def rewired_graph(graph: Graph, swaps_per_edge: float, seed: int) -> Graph:
    """``graph`` randomly rewired, every node keeping its degrees, ``swaps_per_edge`` swaps per
    edge; weights become 1 and self-loops are dropped. An undirected graph gets networkx's
    ``double_edge_swap`` (``u-v, x-y -> u-x, v-y``: degrees kept); a directed one its
    ``directed_edge_swap`` (``u->v->x->y -> u->x->v->y``: in- and out-degrees kept). The
    structure is scrambled: the control for "does this graph matter, or would any graph with
    these degrees do?"."""
    import networkx as nx

    simple = simple_graph(graph)
    swaps = int(swaps_per_edge * simple.number_of_edges())
    try:
        swap_edges(simple, swaps, seed)
    except nx.NetworkXException as error:
        raise ConfigError(
            f"graph=rewired cannot rewire {graph.name!r} ({error}); accepted: a graph with edges that can be "
            "swapped (two disjoint edges, or a directed path of 3 edges), or graph.swaps_per_edge=0"
        ) from None
    return from_simple(simple, graph, f"{graph.name} rewired")


def swap_edges(graph: nx.Graph | nx.DiGraph, swaps: int, seed: int) -> None:
    """``swaps`` degree-preserving edge swaps in place: ``u-v, x-y -> u-x, v-y`` on an undirected
    graph, ``u->v->x->y -> u->x->v->y`` on a directed one (networkx's)."""
    import networkx as nx

    if swaps:
        swap = nx.directed_edge_swap if graph.is_directed() else nx.double_edge_swap
        swap(graph, nswap=swaps, max_tries=swaps * 100, seed=seed)


def sbm_graph(nodes: int, blocks: int, p_in: float, p_out: float, seed: int) -> Graph:
    """An undirected stochastic block model: ``blocks`` near-equal blocks of consecutive nodes,
    edge probability ``p_in`` inside a block and ``p_out`` between blocks."""
    import networkx as nx

    sizes = [nodes // blocks + (1 if b < nodes % blocks else 0) for b in range(blocks)]
    probabilities = [[p_in if a == b else p_out for b in range(blocks)] for a in range(blocks)]
    model = nx.stochastic_block_model(sizes, probabilities, seed=seed)
    return Graph.from_networkx(model, name="sbm")


@dataclass
class GridGraphConfig(GraphConfig):
    source: str = "grid"
    rows: int = declared(at_least(1), 8)
    cols: int = declared(at_least(1), 8)

    def check_fits(self, nodes: int) -> None:
        if self.rows * self.cols != nodes:
            raise ConfigError(
                f"graph.rows*graph.cols={self.rows}*{self.cols}={self.rows * self.cols} is not accepted; "
                f"accepted: rows*cols equal to the data's {nodes} nodes"
            )


@dataclass
class KnnGraphConfig(NeighborsGraphConfig):
    """Each node linked to its ``neighbors`` nearest nodes: on positions where the data has
    them, else on the training signals."""

    source: str = "knn"


@dataclass
class GeometricGraphConfig(GraphConfig):
    """Nodes closer than ``radius`` on their positions."""

    source: str = "geometric"
    radius: float = declared(POSITIVE, 0.2)


@dataclass
class RewiredGraphConfig(GraphConfig):
    """The native graph with its edges scrambled, every node keeping its degree."""

    source: str = "rewired"
    swaps_per_edge: float = declared(at_least(0, "a number"), 5.0)
    seed: int = declared(at_least(0), 0)


@dataclass
class SbmGraphConfig(GraphConfig):
    source: str = "sbm"
    blocks: int = declared(at_least(1), 4)
    p_in: float = declared(PROBABILITY, 0.3)
    p_out: float = declared(PROBABILITY, 0.02)
    seed: int = declared(at_least(0), 0)


def _knn(config: KnnGraphConfig, dataset: Dataset) -> Graph:
    positions = dataset.native_graph.positions
    if positions is None:
        return signal_knn_graph(dataset.signals[dataset.splits.train], config.neighbors)
    return knn_graph(positions.numpy(), config.neighbors)


def _geometric(config: GeometricGraphConfig, dataset: Dataset) -> Graph:
    return geometric_graph(dataset.native_graph.positions.numpy(), config.radius)


for _entry in (
    GraphSource("native", GraphConfig, lambda config, dataset: dataset.native_graph, "native graph"),
    GraphSource("line", GraphConfig, lambda config, dataset: line_graph(dataset.nodes), "line graph"),
    GraphSource("cycle", GraphConfig, lambda config, dataset: cycle_graph(dataset.nodes), "cycle"),
    GraphSource("path", GraphConfig, lambda config, dataset: path_graph(dataset.nodes), "path"),
    GraphSource("grid", GridGraphConfig, lambda config, dataset: grid_graph(config.rows, config.cols), "grid"),
    GraphSource("knn", KnnGraphConfig, _knn, "k-NN graph"),
    GraphSource("geometric", GeometricGraphConfig, _geometric, "radius graph", needs=("positions",)),
    GraphSource(
        "rewired", RewiredGraphConfig,
        lambda config, dataset: rewired_graph(dataset.native_graph, config.swaps_per_edge, config.seed),
        "native graph rewired",
    ),
    GraphSource(
        "sbm", SbmGraphConfig,
        lambda config, dataset: sbm_graph(dataset.nodes, config.blocks, config.p_in, config.p_out, config.seed),
        "SBM graph",
    ),
):
    GRAPH_SOURCES.add(_entry)


def build_graph(config: GraphConfig, dataset: Dataset) -> Graph:
    """The graph that ``config.source`` names, on ``dataset``'s nodes. Sources learned from
    signals see the training split only.

    Raises:
        ConfigError: the data lacks what the source declares it needs.
    """
    source = GRAPH_SOURCES[config.source]
    if "positions" in source.needs and dataset.native_graph.positions is None:
        raise ConfigError(
            f"graph={source.name} needs node positions and data {dataset.name!r} has none; "
            "accepted: data with positions (sensor_regimes, digits, a .npz with 'positions')"
        )
    return source.build(config, dataset)
