"""Spectra and Fourier bases of the built graphs against closed forms.

Source: Brouwer & Haemers, "Spectra of Graphs" (Springer, 2012), section 1.4 (paths, cycles,
products); Sandryhaila & Moura, "Discrete signal processing on graphs", IEEE TSP 61(7), 2013
(the directed cycle's adjacency is diagonalised by the DFT).
"""

import numpy as np
import pytest

from shiftbench.graphs.operators import operator_matrix
from shiftbench.graphs.sources import cycle_graph, grid_graph, path_graph


@pytest.mark.parametrize("nodes", [3, 8, 17])
def test_dft_diagonalises_the_directed_cycle(nodes):
    shift = operator_matrix(cycle_graph(nodes), "adjacency").toarray()
    dft = np.fft.fft(np.eye(nodes))  # F[k, n] = exp(-2 pi i k n / N), numpy.fft's convention
    diagonalised = dft @ shift @ np.linalg.inv(dft)
    expected = np.exp(-2j * np.pi * np.arange(nodes) / nodes)
    np.testing.assert_allclose(diagonalised, np.diag(expected), atol=1e-10)


@pytest.mark.parametrize("nodes", [3, 8, 17])
def test_undirected_cycle_adjacency_eigenvalues_are_two_cosines(nodes):
    directed = operator_matrix(cycle_graph(nodes), "adjacency")
    undirected = (directed + directed.T).toarray()
    expected = 2 * np.cos(2 * np.pi * np.arange(nodes) / nodes)
    np.testing.assert_allclose(np.sort(np.linalg.eigvalsh(undirected)), np.sort(expected), atol=1e-10)


@pytest.mark.parametrize("nodes", [2, 8, 21])
def test_path_adjacency_eigenvalues_are_two_cosines(nodes):
    shift = operator_matrix(path_graph(nodes), "adjacency").toarray()
    expected = 2 * np.cos(np.pi * np.arange(1, nodes + 1) / (nodes + 1))
    np.testing.assert_allclose(np.sort(np.linalg.eigvalsh(shift)), np.sort(expected), atol=1e-10)


@pytest.mark.parametrize(("rows", "cols"), [(2, 3), (4, 4), (3, 7)])
def test_grid_laplacian_eigenvalues_are_sums_of_path_eigenvalues(rows, cols):
    def path_laplacian(n):
        return 2 - 2 * np.cos(np.pi * np.arange(n) / n)

    laplacian = operator_matrix(grid_graph(rows, cols), "laplacian").toarray()
    expected = (path_laplacian(rows)[:, None] + path_laplacian(cols)[None, :]).ravel()
    np.testing.assert_allclose(np.sort(np.linalg.eigvalsh(laplacian)), np.sort(expected), atol=1e-10)
