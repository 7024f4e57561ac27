"""Graph sources learned from signals: correlation between nodes, and k-NN on node signals.

Both see only the training split's signals, so validation and test data never shape a graph.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from shiftbench.config import at_least, declared
from shiftbench.errors import ConfigError
from shiftbench.graphs.graph import Graph, symmetrized
from shiftbench.graphs.operators import GraphConfig
from shiftbench.registry import GRAPH_SOURCES, GraphSource


@dataclass
class NeighborsGraphConfig(GraphConfig):
    """A graph linking each node to ``neighbors`` others."""

    neighbors: int = declared(at_least(1), 6)

    def check_fits(self, nodes: int) -> None:
        if self.neighbors >= nodes:
            raise ConfigError(
                f"graph.neighbors={self.neighbors} is not accepted; accepted: fewer than the data's {nodes} nodes"
            )


@dataclass
class CorrelationGraphConfig(NeighborsGraphConfig):
    """Each node's ``neighbors`` strongest absolute correlations over the training split."""

    source: str = "correlation"


def node_profiles(signals: np.ndarray) -> np.ndarray:
    """Each node's training signals as one row: ``(samples, nodes, features)`` ->
    ``(nodes, samples * features)``."""
    samples, nodes, features = signals.shape
    return signals.transpose(1, 0, 2).reshape(nodes, samples * features).astype(np.float64)  # (samples, nodes, features) -> (nodes, samples * features)


def correlation_graph(signals: np.ndarray, neighbors: int) -> Graph:
    """Link each node to the ``neighbors`` nodes whose signals correlate most strongly with its own
    (largest ``|corr|``), symmetrized, with weights ``|corr|``.

    Args:
        signals: ``(samples, nodes, features)``, the training split only.
    """
    profiles = node_profiles(signals)
    with np.errstate(invalid="ignore", divide="ignore"):
        strength = np.abs(np.corrcoef(profiles))
    strength = np.nan_to_num(strength, nan=0.0)  # a constant node correlates with nothing
    np.fill_diagonal(strength, 0.0)
    nodes = len(strength)
    keep = min(neighbors, nodes - 1)
    strongest = np.argpartition(-strength, keep - 1, axis=1)[:, :keep]
    rows = np.repeat(np.arange(nodes), keep)
    chosen = sp.csr_matrix((strength[rows, strongest.ravel()], (rows, strongest.ravel())), shape=(nodes, nodes))
    return Graph.from_adjacency(symmetrized(chosen), name="correlation")


def signal_knn_graph(signals: np.ndarray, neighbors: int) -> Graph:
    """Link each node to the ``neighbors`` nodes with the nearest training signals (Euclidean
    distance between node profiles), symmetrized, unit weights.

    Args:
        signals: ``(samples, nodes, features)``, the training split only.
    """
    from sklearn.neighbors import kneighbors_graph

    directed = kneighbors_graph(node_profiles(signals), n_neighbors=neighbors, mode="connectivity")
    return Graph.from_adjacency(symmetrized(directed), name="knn")


GRAPH_SOURCES.add(
    GraphSource(
        "correlation",
        CorrelationGraphConfig,
        lambda config, dataset: correlation_graph(dataset.signals[dataset.splits.train], config.neighbors),
        "correlation graph",
    )
)
