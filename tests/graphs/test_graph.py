"""The graph dataclass: its shift convention and conversions."""

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
import torch

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import grid_graph, knn_graph, line_graph, sbm_graph


def test_line_graph_shift_is_a_one_sample_delay():
    signal = torch.arange(1.0, 7.0)
    shift = shift_operator(line_graph(6), "adjacency", "none")
    delayed = (shift @ signal[:, None]).ravel()
    np.testing.assert_array_equal(delayed.numpy(), [0, 1, 2, 3, 4, 5])


def test_networkx_round_trip_keeps_edges_and_weights():
    original = nx.gnm_random_graph(12, 30, seed=1, directed=True)
    for u, v in original.edges:
        original[u][v]["weight"] = float(u + 2 * v + 1)
    back = Graph.from_networkx(original).to_networkx()
    assert {(u, v, d["weight"]) for u, v, d in back.edges(data=True)} == {
        (u, v, d["weight"]) for u, v, d in original.edges(data=True)
    }


def test_scipy_and_torch_sparse_views_agree():
    graph = sbm_graph(20, 2, 0.5, 0.1, seed=0)
    np.testing.assert_array_equal(graph.adjacency().toarray(), graph.to_torch_sparse().to_dense().numpy())


def test_from_adjacency_sums_duplicate_entries():
    matrix = sp.coo_matrix(([1.0, 2.0], ([1, 1], [0, 0])), shape=(2, 2))
    graph = Graph.from_adjacency(matrix)
    assert graph.edges == 1 and graph.edge_weight.item() == 3.0


def test_edges_of_weight_zero_are_dropped_and_noted_apart_from_summed_duplicates():
    # scipy.sparse: sum_duplicates merges repeated entries; eliminate_zeros removes stored zeros.
    matrix = sp.coo_matrix(([0.0, 0.0, 1.0, 1.0], ([0, 1, 2, 2], [1, 0, 3, 3])), shape=(4, 4))
    graph = Graph.from_adjacency(matrix)
    assert graph.edges == 1 and graph.notes == ("1 duplicate edges summed", "2 edges of weight 0 dropped")


def test_edge_index_outside_the_nodes_is_rejected():
    with pytest.raises(ValueError, match="outside 0..2"):
        Graph(nodes=3, edge_index=torch.tensor([[0], [3]]), edge_weight=torch.ones(1))


def test_grid_nodes_are_in_raster_order():
    graph = grid_graph(2, 3)
    neighbours_of_first = set(graph.edge_index[1][graph.edge_index[0] == 0].tolist())
    assert neighbours_of_first == {1, 3}


def test_knn_graph_is_symmetric_with_at_least_k_neighbours():
    graph = knn_graph(np.random.default_rng(0).random((30, 2)), 4)
    adjacency = graph.adjacency()
    assert graph.is_symmetric()
    assert (np.asarray((adjacency > 0).sum(axis=1)).ravel() >= 4).all()
