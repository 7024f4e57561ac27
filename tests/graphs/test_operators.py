"""Shift operators against networkx's matrices, and spectral scaling."""

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import operator_matrix, shift_operator, spectral_radius
from shiftbench.graphs.sources import cycle_graph, knn_graph, line_graph, sbm_graph


@pytest.fixture
def weighted_graph():
    graph = nx.gnm_random_graph(30, 90, seed=3)
    rng = np.random.default_rng(3)
    for u, v in graph.edges:
        graph[u][v]["weight"] = rng.uniform(0.5, 2.0)
    return graph


def test_laplacian_matches_networkx(weighted_graph):
    # Source: networkx.laplacian_matrix (L = D - A).
    ours = operator_matrix(Graph.from_networkx(weighted_graph), "laplacian").toarray()
    reference = nx.laplacian_matrix(weighted_graph, nodelist=range(30)).toarray()
    np.testing.assert_allclose(ours, reference, atol=1e-12)


def test_normalized_laplacian_matches_networkx(weighted_graph):
    # Source: networkx.normalized_laplacian_matrix (I - D^-1/2 A D^-1/2).
    ours = operator_matrix(Graph.from_networkx(weighted_graph), "normalized_laplacian").toarray()
    reference = nx.normalized_laplacian_matrix(weighted_graph, nodelist=range(30)).toarray()
    np.testing.assert_allclose(ours, reference, atol=1e-12)


def test_normalized_adjacency_is_identity_minus_normalized_laplacian(weighted_graph):
    graph = Graph.from_networkx(weighted_graph)
    adjacency = operator_matrix(graph, "normalized_adjacency").toarray()
    laplacian = operator_matrix(graph, "normalized_laplacian").toarray()
    np.testing.assert_allclose(adjacency, np.eye(30) - laplacian, atol=1e-12)


def test_spectral_scaling_gives_unit_spectral_radius():
    graph = knn_graph(np.random.default_rng(0).random((40, 2)), 5)
    shift = shift_operator(graph, "laplacian", "spectral").to_dense().double().numpy()
    assert np.abs(np.linalg.eigvals(shift)).max() == pytest.approx(1.0, rel=1e-5)


def test_nilpotent_line_graph_is_left_unscaled():
    # The directed line graph's adjacency is nilpotent (radius 0): scaling must not divide by 0.
    shift = shift_operator(line_graph(10), "adjacency", "spectral").to_dense()
    np.testing.assert_array_equal(shift.numpy(), np.eye(10, k=-1))


@pytest.mark.parametrize("graph", [sbm_graph(1500, 3, 0.02, 0.002, seed=1), cycle_graph(1500)], ids=["sbm", "cycle"])
def test_sparse_eigensolver_agrees_with_dense_on_large_graphs(graph):
    # Source: numpy.linalg.eigvals as the dense reference for scipy's ARPACK path.
    matrix = operator_matrix(graph, "adjacency")
    dense = np.abs(np.linalg.eigvals(matrix.toarray())).max()
    assert spectral_radius(sp.csr_matrix(matrix)) == pytest.approx(dense, rel=1e-6)


@pytest.mark.parametrize(("make", "radius"), [(line_graph, 0.0), (cycle_graph, 1.0)], ids=["line", "cycle"])
def test_exact_radius_shortcuts_agree_with_the_dense_eigenvalues(make, radius):
    # Source: numpy.linalg.eigvals on the same matrix (the line graph is nilpotent, the cycle's
    # eigenvalues are the N-th roots of unity).
    matrix = sp.csr_matrix(operator_matrix(make(300), "adjacency"))
    assert spectral_radius(matrix) == radius
    assert np.abs(np.linalg.eigvals(matrix.toarray())).max() == pytest.approx(radius, abs=1e-6)


def test_a_large_directed_line_graph_has_radius_exactly_zero():
    # Nilpotent at any size (common practice, no source); ARPACK does not converge on it.
    assert spectral_radius(sp.csr_matrix(operator_matrix(line_graph(20000), "adjacency"))) == 0.0
