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


def directed_with_source_sink_and_isolated() -> nx.DiGraph:
    """Node 0 a source (no in-edges), node 3 a sink (no out-edges), node 4 isolated; weighted."""
    graph = nx.DiGraph()
    graph.add_nodes_from(range(5))
    graph.add_weighted_edges_from([(0, 1, 2.0), (0, 2, 1.0), (1, 2, 0.5), (2, 1, 1.5), (2, 3, 3.0), (1, 3, 1.0)])
    return graph


def test_undirected_normalized_laplacian_with_an_isolated_node_matches_scipy_and_networkx():
    # References: scipy.sparse.csgraph.laplacian(normed=True) and networkx.normalized_laplacian_matrix,
    # both 0 on the diagonal of an isolated node.
    from scipy.sparse.csgraph import laplacian

    graph = nx.path_graph(4)
    graph.add_node(4)
    ours = operator_matrix(Graph.from_networkx(graph), "normalized_laplacian").toarray()
    matrix = nx.to_numpy_array(graph, nodelist=range(5))
    np.testing.assert_allclose(ours, laplacian(matrix, normed=True), atol=1e-12)
    np.testing.assert_allclose(ours, nx.normalized_laplacian_matrix(graph, nodelist=range(5)).toarray(), atol=1e-12)
    assert ours[4, 4] == 0


def test_directed_laplacian_matches_scipys_in_degree_laplacian():
    # Reference: scipy.sparse.csgraph.laplacian(use_out_degree=False); scipy's G[i, j] is an edge
    # i -> j, our A[i, j] an edge j -> i, so ours is scipy's transposed.
    from scipy.sparse.csgraph import laplacian

    graph = directed_with_source_sink_and_isolated()
    ours = operator_matrix(Graph.from_networkx(graph), "laplacian").toarray()
    scipy_graph = nx.to_numpy_array(graph, nodelist=range(5))
    np.testing.assert_allclose(ours, laplacian(scipy_graph, use_out_degree=False).T, atol=1e-12)


def test_directed_normalized_adjacency_keeps_every_edge_scaled_by_target_in_and_source_out_degree():
    # Reference: networkx's weighted in_degree and out_degree; S[i, j] = A[i, j] / sqrt(in(i) out(j))
    # for each edge j -> i (the convention in the operators module's docstring).
    graph = directed_with_source_sink_and_isolated()
    ours = operator_matrix(Graph.from_networkx(graph), "normalized_adjacency").toarray()
    into, out = dict(graph.in_degree(weight="weight")), dict(graph.out_degree(weight="weight"))
    expected = np.zeros((5, 5))
    for source, target, weight in graph.edges(data="weight"):
        expected[target, source] = weight / np.sqrt(into[target] * out[source])
    np.testing.assert_allclose(ours, expected, atol=1e-12)
    assert (ours[:, 0] != 0).sum() == 2  # the source keeps both its outgoing edges


def test_directed_normalized_laplacian_is_zero_only_on_the_isolated_node():
    graph = directed_with_source_sink_and_isolated()
    ours = operator_matrix(Graph.from_networkx(graph), "normalized_laplacian").toarray()
    assert np.diag(ours).tolist() == [1, 1, 1, 1, 0]


def test_the_line_graphs_normalized_adjacency_is_its_delay_and_keeps_the_delay_plan():
    from shiftbench.models.shift_products import Delay, plan

    line = line_graph(16)
    np.testing.assert_array_equal(operator_matrix(line, "normalized_adjacency").toarray(), operator_matrix(line, "adjacency").toarray())
    assert isinstance(plan(shift_operator(line, "normalized_adjacency", "none")), Delay)
