"""The graph-filter layer against PyG's TAGConv and a dense reference.

Source: torch_geometric.nn.TAGConv (Du et al. 2017, "Topology adaptive graph convolutional
networks"): with ``normalize=False`` it computes ``sum_k Lin_k(A^k x) + b`` where
``(A x)_i = sum_{j -> i} w_ji x_j``, our shift convention.
"""

import numpy as np
import pytest
import torch
from torch_geometric.nn import TAGConv

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import knn_graph, sbm_graph
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer


def random_graph(nodes: int, seed: int) -> Graph:
    rng = np.random.default_rng(seed)
    edges = rng.integers(0, nodes, size=(2, 4 * nodes))
    return Graph(
        nodes=nodes,
        edge_index=torch.from_numpy(edges),
        edge_weight=torch.from_numpy(rng.uniform(-1, 1, 4 * nodes).astype(np.float32)),
    )


@pytest.mark.parametrize(("nodes", "in_channels", "out_channels", "order", "seed"), [
    (7, 1, 1, 0, 0), (25, 3, 4, 2, 1), (40, 5, 2, 5, 2), (60, 8, 8, 3, 3),
])
def test_graph_filter_equals_tagconv_with_mapped_weights(nodes, in_channels, out_channels, order, seed):
    torch.manual_seed(seed)
    graph = random_graph(nodes, seed)
    graph = Graph.from_adjacency(graph.adjacency())  # duplicate edges summed, as the layer sees them
    layer = ShiftPolynomialLayer(shift_operator(graph, "adjacency", "none"), in_channels, out_channels, order)
    tag = TAGConv(in_channels, out_channels, K=order, normalize=False)
    with torch.no_grad():
        for k, linear in enumerate(tag.lins):
            linear.weight.copy_(layer.taps[k].T)
        tag.bias.copy_(layer.bias)
    x = torch.randn(3, nodes, in_channels)
    reference = torch.stack([tag(sample, graph.edge_index, graph.edge_weight) for sample in x])
    torch.testing.assert_close(layer(x), reference, atol=1e-5, rtol=1e-5)


def test_graph_filter_equals_dense_matrix_powers():
    torch.manual_seed(0)
    graph = sbm_graph(30, 3, 0.4, 0.05, seed=0)
    shift = shift_operator(graph, "normalized_laplacian", "spectral")
    layer = ShiftPolynomialLayer(shift, 2, 3, 4)
    dense = shift.to_dense()
    x = torch.randn(5, 30, 2)
    expected = sum(torch.linalg.matrix_power(dense, k) @ x @ layer.taps[k] for k in range(5)) + layer.bias
    torch.testing.assert_close(layer(x), expected, atol=1e-5, rtol=1e-5)


def test_gradients_flow_to_taps_and_input():
    graph = knn_graph(np.random.default_rng(1).random((20, 2)), 4)
    layer = ShiftPolynomialLayer(shift_operator(graph), 2, 3, 2)
    x = torch.randn(4, 20, 2, requires_grad=True)
    layer(x).square().sum().backward()
    assert x.grad is not None and x.grad.abs().sum() > 0
    assert layer.taps.grad is not None and layer.taps.grad.abs().sum() > 0


def test_graph_filter_gradient_matches_finite_differences():
    # Source: torch.autograd.gradcheck (finite differences in float64).
    graph = sbm_graph(12, 2, 0.5, 0.1, seed=2)
    shift = shift_operator(graph).to_dense().double().to_sparse_csr()
    layer = ShiftPolynomialLayer(shift, 2, 2, 3).double()
    x = torch.randn(2, 12, 2, dtype=torch.double, requires_grad=True)
    assert torch.autograd.gradcheck(layer, (x,))


def test_a_negative_order_is_a_one_line_error_not_a_division_by_zero():
    from shiftbench.graphs.standard import line_graph

    shift = shift_operator(line_graph(5), "adjacency", "none")
    with pytest.raises(ValueError, match=r"^order=-1 is not accepted; accepted: an integer >= 0$"):
        ShiftPolynomialLayer(shift, 1, 2, order=-1)


def test_reprs_say_what_each_layer_computes():
    # What print(model) shows (torch's extra_repr convention): order, plan, causality, readout kind.
    from shiftbench.graphs.standard import cycle_graph, path_graph
    from shiftbench.models import LineConv, ShiftPolynomialNet

    delay = ShiftPolynomialNet(shift_operator(cycle_graph(6), "adjacency", "none"), 1, [4], 2, order=2)
    sparse = ShiftPolynomialNet(shift_operator(path_graph(6), "adjacency", "none"), 1, [4], 2, order=3, readout="max")
    line = LineConv(6, 1, [4], 2, order=2, boundary="circular", readout="flatten")
    assert "ShiftPolynomialLayer(1, 4, order=2, nodes=6, plan=delay (circular boundary), bias=True)" in repr(delay)
    assert "plan=sparse" in repr(sparse) and "kind=max" in repr(sparse)
    assert "1, 4, order=2, padding=causal, boundary=circular" in repr(line) and "kind=flatten" in repr(line)
