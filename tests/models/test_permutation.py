"""Relabelling nodes: graph_conv is equivariant, fc and line_conv are not.

Source: Gama, Bruna & Ribeiro, "Stability properties of graph neural networks", IEEE TSP 68
(2020), Proposition 1 (permutation equivariance of graph filters).
"""

import numpy as np
import pytest
import torch

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import knn_graph
from shiftbench.models import FullyConnected, ShiftPolynomialNet, LineConv

NODES = 25


def relabel(graph: Graph, permutation: torch.Tensor) -> Graph:
    return graph.permuted(permutation)


@pytest.fixture
def setting():
    torch.manual_seed(0)
    graph = knn_graph(np.random.default_rng(0).random((NODES, 2)), 4)
    permutation = torch.randperm(NODES)
    x = torch.randn(6, NODES, 2)
    return graph, permutation, x


def test_graph_conv_node_features_are_permuted_with_the_nodes(setting):
    graph, permutation, x = setting
    model = ShiftPolynomialNet(shift_operator(graph), 2, [4, 4], 3, order=3)
    relabelled = ShiftPolynomialNet(shift_operator(relabel(graph, permutation)), 2, [4, 4], 3, order=3)
    relabelled.load_state_dict(model.state_dict())
    torch.testing.assert_close(relabelled.features(x[:, permutation]), model.features(x)[:, permutation], atol=1e-5, rtol=1e-5)


@pytest.mark.parametrize("readout", ["mean", "max"])
def test_graph_conv_pooled_logits_are_unchanged_by_relabelling(setting, readout):
    graph, permutation, x = setting
    model = ShiftPolynomialNet(shift_operator(graph), 2, [4], 3, order=2, readout=readout)
    relabelled = ShiftPolynomialNet(shift_operator(relabel(graph, permutation)), 2, [4], 3, order=2, readout=readout)
    relabelled.load_state_dict(model.state_dict())
    torch.testing.assert_close(relabelled(x[:, permutation]), model(x), atol=1e-5, rtol=1e-5)


def test_fc_logits_change_when_nodes_are_relabelled(setting):
    _, permutation, x = setting
    model = FullyConnected(NODES, 2, [16], 3)
    assert (model(x[:, permutation]) - model(x)).abs().max() > 1e-3


def test_line_conv_logits_change_when_nodes_are_relabelled(setting):
    _, permutation, x = setting
    model = LineConv(NODES, 2, [4], 3, order=3)
    assert (model(x[:, permutation]) - model(x)).abs().max() > 1e-3
