"""The graph check's statistics against outside references, and its answers on planted cases."""

import networkx as nx
import numpy as np
import scipy.sparse as sp

from shiftbench.data.sensor_regimes import sensor_regimes
from shiftbench.graph_check import (
    band_coefficients, band_energies, check_graph, dirichlet_energy, morans_i, normalized_laplacian, structure,
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
    native = check_graph(dataset, dataset.native_graph, classes=True, rewirings=19, spectral_rewirings=9)
    null = check_graph(dataset, rewired_graph(dataset.native_graph, 10, 7), classes=True, rewirings=19, spectral_rewirings=9)
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
    check = check_graph(dataclasses.replace(dataset, native_graph=pair), pair, classes=True, rewirings=5)
    assert check.comparisons == [] and any("cannot change the graph" in note for note in check.notes)
    assert any("6 isolated nodes" in note for note in check.notes)
