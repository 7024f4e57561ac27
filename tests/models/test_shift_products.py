"""Which plan a shift operator gets, and the generic sparse plan against dense references.

References: dense matrix powers (``torch.linalg.matrix_power``) and autograd through them for
the gradients; networkx for the graphs.
"""

import numpy as np
import pytest
import scipy.sparse as sp
import torch

from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import cycle_graph, grid_graph, knn_graph, line_graph, path_graph
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer, chunk_size
from shiftbench.models.shift_products import Delay, SparseShift, find_delay, plan


@pytest.mark.parametrize(("graph", "kind"), [(line_graph(30), "line"), (cycle_graph(30), "cycle")])
def test_directed_line_and_cycle_are_planned_as_delays(graph, kind):
    assert plan(shift_operator(graph, "adjacency", "spectral")) == Delay(kind, 1.0)


def test_a_scaled_delay_keeps_its_weight():
    matrix = sp.diags([np.full(9, 0.5)], [-1], shape=(10, 10), format="csr")
    assert find_delay(matrix) == Delay("line", 0.5)


@pytest.mark.parametrize("matrix", [
    sp.diags([np.full(9, 1.0)], [1], shape=(10, 10), format="csr"),  # an advance, not a delay
    sp.diags([np.r_[np.ones(8), 2.0]], [-1], shape=(10, 10), format="csr"),  # unequal weights
    sp.diags([np.ones(9), np.ones(9)], [-1, 1], shape=(10, 10), format="csr"),  # undirected path
    sp.csr_matrix((10, 10)),  # no edges
], ids=["advance", "unequal_weights", "undirected_path", "empty"])
def test_other_matrices_are_not_delays(matrix):
    assert find_delay(matrix) is None


@pytest.mark.parametrize("graph", [path_graph(30), grid_graph(5, 6), line_graph(30)], ids=["path", "grid", "line"])
def test_laplacians_and_undirected_graphs_take_the_sparse_plan(graph):
    assert isinstance(plan(shift_operator(graph, "laplacian", "none")), SparseShift)


def test_renumbering_round_trips_every_sample():
    shift = plan(shift_operator(knn_graph(np.random.default_rng(0).random((50, 2)), 4)))
    samples = torch.randn(3, 50, 2)
    back = torch.empty_like(samples)
    shift.scatter(shift.gather(samples), back)
    assert torch.equal(back, samples) and not torch.equal(shift.renumbering(torch.device("cpu"))[0], torch.arange(50))


def test_batches_of_many_chunks_equal_dense_powers_in_values_and_gradients():
    nodes, order = 400, 3
    batch = 3 * chunk_size(10**6, nodes, 5, 8) + 2  # three full chunks and a remainder
    assert batch > chunk_size(batch, nodes, 5, 8)
    torch.manual_seed(5)
    shift = shift_operator(knn_graph(np.random.default_rng(1).random((nodes, 2)), 6), "normalized_laplacian").double()
    layer = ShiftPolynomialLayer(shift, 5, 4, order).double()
    x = torch.randn(batch, nodes, 5, dtype=torch.double, requires_grad=True)
    dense = shift.to_dense()
    expected = sum(torch.linalg.matrix_power(dense, k) @ x @ layer.taps[k] for k in range(order + 1)) + layer.bias
    torch.testing.assert_close(layer(x), expected)
    weights = torch.randn_like(expected)
    got = torch.autograd.grad((layer(x) * weights).sum(), (x, layer.taps, layer.bias))
    want = torch.autograd.grad((expected * weights).sum(), (x, layer.taps, layer.bias))
    for got_grad, want_grad in zip(got, want):
        torch.testing.assert_close(got_grad, want_grad)


def test_renumbered_filter_equals_torchs_csr_product_on_the_original_numbering():
    # Reference: torch's own CSR product, Horner's rule on the original node numbers.
    nodes = 300
    shift = shift_operator(knn_graph(np.random.default_rng(2).random((nodes, 2)), 5))
    torch.manual_seed(6)
    layer = ShiftPolynomialLayer(shift, 2, 3, 3)
    x = torch.randn(5, nodes, 2)
    expected = x @ layer.taps[3]
    for k in range(2, -1, -1):
        expected = torch.stack([shift @ sample for sample in expected]) + x @ layer.taps[k]
    torch.testing.assert_close(layer(x), expected + layer.bias, atol=1e-5, rtol=1e-5)
