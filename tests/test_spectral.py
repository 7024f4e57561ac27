"""Frequency responses of graph filters."""

import numpy as np
import pytest
import torch

from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import cycle_graph, knn_graph
from shiftbench.models import ShiftPolynomialNet
from shiftbench.spectral import frequencies, frequency_response, layer_responses, summarize


def test_response_on_the_directed_cycle_is_the_dft_of_the_taps():
    # Source: Sandryhaila & Moura 2013, "Discrete signal processing on graphs", IEEE TSP 61(7):
    # the cycle's eigenvalues are exp(-2 pi i k / N) and a filter's response there is the DFT
    # of its taps (numpy.fft.fft, zero-padded to N).
    nodes, taps = 16, np.random.default_rng(0).standard_normal(5)
    eigenvalues = np.exp(-2j * np.pi * np.arange(nodes) / nodes)
    np.testing.assert_allclose(frequency_response(taps, eigenvalues), np.fft.fft(taps, nodes), atol=1e-10)
    exact = frequencies(shift_operator(cycle_graph(nodes), "adjacency", "none"))
    distances = np.abs(exact[:, None] - eigenvalues[None, :])
    assert distances.min(axis=0).max() < 1e-8 and distances.min(axis=1).max() < 1e-8


def test_response_on_an_eigenvector_is_the_filter_gain():
    graph = knn_graph(np.random.default_rng(1).random((30, 2)), 4)
    shift = shift_operator(graph, "normalized_laplacian")
    values, vectors = np.linalg.eigh(shift.to_dense().double().numpy())
    torch.manual_seed(0)
    model = ShiftPolynomialNet(shift, 1, [1], 2, order=3)
    layer = model.layers[0]
    x = torch.from_numpy(vectors[:, 7]).float().view(1, 30, 1)
    filtered = (layer(x) - layer.bias).detach().numpy().ravel()
    gain = layer_responses(model, values[7:8])[0][0, 0, 0]
    np.testing.assert_allclose(filtered, gain * vectors[:, 7], atol=1e-5)


def test_summary_gives_median_and_band_of_magnitudes_per_frequency():
    # Frequency 0 holds the magnitudes 0..11 (signs flipped on half): median 5.5, 10th and 90th
    # percentiles 1.1 and 9.9 (numpy's linear interpolation: 0.1 * 11 and 0.9 * 11).
    responses = np.arange(2 * 3 * 4, dtype=float).reshape(2, 3, 4)
    responses[0, ::2] *= -1
    summary = summarize(responses)
    assert summary["median"].tolist() == [5.5, 17.5]
    assert summary["low"] == pytest.approx([1.1, 13.1]) and summary["high"] == pytest.approx([9.9, 21.9])
