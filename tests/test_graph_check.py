"""The graph check's statistics against outside references, and its answers on planted cases."""

import networkx as nx
import numpy as np
import scipy.sparse as sp

from shiftbench.data.sensor_regimes import sensor_regimes
from shiftbench.graph_check import (
    band_coefficients, band_energies, check_graph, dirichlet_energy, morans_i, normalized_laplacian, sentence, structure,
)
from shiftbench.graphs.sources import rewired_graph
from shiftbench.graphs.standard import grid_graph


def test_morans_i_matches_esda_with_row_standardized_weights():
    # Reference: PySAL's esda.Moran (Moran 1950; row-standardized weights, transformation "r").
    import esda
    from libpysal.weights import WSP

    adjacency = structure(grid_graph(5, 6))
    values = np.random.default_rng(0).standard_normal((3, 30)) + np.arange(30) / 10
    weights = WSP(sp.csr_matrix(adjacency)).to_W(silence_warnings=True)
    expected = [esda.Moran(row, weights, transformation="r", permutations=0).I for row in values]
    np.testing.assert_allclose(morans_i(values, adjacency), expected, rtol=1e-10)


def test_dirichlet_energy_matches_networkx_laplacian():
    # Reference: networkx.laplacian_matrix (L = D - A); the centred signal's x^T L x / x^T x.
    graph = nx.connected_watts_strogatz_graph(40, 4, 0.2, seed=1)
    adjacency = sp.csr_matrix(nx.to_scipy_sparse_array(graph, nodelist=range(40), format="csr"), dtype=float)
    laplacian = nx.laplacian_matrix(graph, nodelist=range(40)).toarray()
    signal = np.random.default_rng(2).standard_normal(40)
    centred = signal - signal.mean()
    expected = centred @ laplacian @ centred / (centred @ centred)
    np.testing.assert_allclose(dirichlet_energy(signal[None], adjacency), [expected], rtol=1e-12)


def test_band_energies_match_the_same_filters_applied_by_a_dense_eigendecomposition():
    # Reference: numpy.linalg.eigh and numpy.polynomial.chebyshev.chebval: h(L) = U h(Lambda) U^T.
    adjacency = structure(grid_graph(4, 5))
    signals = np.random.default_rng(3).standard_normal((2, 20))
    coefficients = band_coefficients(bands=4, order=12)
    eigenvalues, vectors = np.linalg.eigh(normalized_laplacian(adjacency).toarray())
    expected = np.empty((2, 4))
    for band in range(4):
        response = np.polynomial.chebyshev.chebval(eigenvalues - 1.0, coefficients[band])
        filtered = (vectors * response) @ vectors.T @ signals.T
        expected[:, band] = (filtered ** 2).sum(axis=0) / (signals ** 2).sum(axis=1)
    np.testing.assert_allclose(band_energies(signals, adjacency, coefficients), expected, rtol=1e-9, atol=1e-12)


def test_the_bands_split_a_signal_s_energy_about_whole():
    # The band indicators sum to 1 on [0, 2], so their smoothed approximations nearly do.
    coefficients = band_coefficients()
    lam = np.linspace(0.05, 1.95, 50)
    total = sum(np.polynomial.chebyshev.chebval(lam - 1.0, row) for row in coefficients)
    np.testing.assert_allclose(total, 1.0, atol=0.02)


def test_the_demo_signals_live_on_their_graph_and_not_on_a_rewiring_of_it():
    dataset = sensor_regimes(nodes=32, samples_per_class=40)
    native = check_graph(dataset, dataset.native_graph, "classification", rewirings=19, spectral_rewirings=9)
    null = check_graph(dataset, rewired_graph(dataset.native_graph, 10, 7), "classification", rewirings=19, spectral_rewirings=9)
    by_name = lambda check: {c.name: c for c in check.comparisons}
    assert by_name(native)["Moran's I"].p == 0.05 and by_name(native)["Dirichlet energy"].p == 0.05
    assert by_name(null)["Moran's I"].p > 0.1
    assert by_name(native)["band-energy accuracy"].observed > by_name(null)["band-energy accuracy"].observed + 0.2


def test_a_graph_with_a_single_edge_has_nothing_to_compare_and_says_so():
    import dataclasses

    import torch

    from shiftbench.graphs.graph import Graph

    dataset = sensor_regimes(nodes=8, samples_per_class=10)
    pair = Graph(nodes=8, edge_index=torch.tensor([[0, 1], [1, 0]]), edge_weight=torch.ones(2), name="pair")
    check = check_graph(dataclasses.replace(dataset, native_graph=pair), pair, "classification", rewirings=5)
    assert check.comparisons == [] and any("cannot change the graph" in note for note in check.notes)
    assert any("6 isolated nodes" in note for note in check.notes)


def test_neighbour_rows_hold_each_nodes_own_features_and_its_neighbours_mean_as_networkx_counts_them():
    # Reference: networkx.neighbors, averaged by hand for every node of every sample.
    from shiftbench.graph_check import neighbour_rows

    graph = nx.path_graph(5)
    graph.add_edge(0, 3)
    adjacency = sp.csr_matrix(nx.to_scipy_sparse_array(graph, nodelist=range(5)), dtype=float)
    signals = np.random.default_rng(4).standard_normal((3, 5, 2))
    rows = neighbour_rows(signals, adjacency).reshape(3, 5, 4)
    for node in range(5):
        expected = signals[:, list(graph.neighbors(node)), :].mean(axis=1)
        np.testing.assert_allclose(rows[:, node, 2:], expected, rtol=1e-12)
    np.testing.assert_array_equal(rows[:, :, :2], signals)


def planted_node_values(on_graph: bool):
    """Values on every node: the mean of the neighbours' signals on a grid (planted), or a
    node's own signal only (null: neighbours carry nothing beyond it)."""
    import dataclasses

    from shiftbench.graph_check import neighbour_rows

    dataset = sensor_regimes(nodes=36, samples_per_class=30, seed=5)
    grid = grid_graph(6, 6)
    rng = np.random.default_rng(6)
    signals = rng.standard_normal((dataset.samples, 36, 1)).astype(np.float32)
    parts = neighbour_rows(signals.astype(np.float64), structure(grid)).reshape(dataset.samples, 36, 2)
    values = parts[:, :, 1:] if on_graph else parts[:, :, :1] ** 2
    values = values + 0.1 * rng.standard_normal(values.shape)
    return dataclasses.replace(dataset, signals=signals, labels=values.astype(np.float32), native_graph=grid)


def test_node_targets_planted_on_the_neighbours_are_found_and_a_null_is_not():
    # Planted: each node's value is its grid neighbours' mean signal, so the grid predicts it and
    # a rewiring does not; null: the value is a function of the node's own signal alone.
    planted = planted_node_values(on_graph=True)
    found = check_graph(planted, planted.native_graph, "node_regression", rewirings=9, spectral_rewirings=9)
    (neighbours,) = [c for c in found.comparisons if c.name == "neighbour-prediction R^2"]
    assert neighbours.observed > 0.8 > neighbours.rewired_mean and neighbours.p == 0.1
    null = planted_node_values(on_graph=False)
    missed = check_graph(null, null.native_graph, "node_regression", rewirings=9, spectral_rewirings=9)
    (neighbours,) = [c for c in missed.comparisons if c.name == "neighbour-prediction R^2"]
    assert neighbours.p > 0.1 and "predicted no better from its neighbours" in sentence(missed)
