"""Parameter counts against torch's own count and the layer formulas of the torch docs.

Source: torch.nn.Linear documentation (weight ``(out, in)``, bias ``(out,)``) and torch.nn.Conv1d
documentation (weight ``(out, in, kernel_size)``, bias ``(out,)``).
"""

import numpy as np
import pytest

from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import knn_graph
from shiftbench.models import FullyConnected, ShiftPolynomialNet, LineConv, count_parameters


def test_fc_count_follows_the_linear_formula():
    model = FullyConnected(nodes=50, features=2, hidden=[32, 16], outputs=4)
    expected = (100 * 32 + 32) + (32 * 16 + 16) + (16 * 4 + 4)
    assert count_parameters(model) == expected == sum(p.numel() for p in model.parameters())


@pytest.mark.parametrize("readout", ["mean", "flatten"])
def test_line_conv_count_follows_the_conv1d_formula(readout):
    model = LineConv(nodes=40, features=3, channels=[8, 5], classes=6, order=4, readout=readout)
    convolutions = (5 * 3 * 8 + 8) + (5 * 8 * 5 + 5)
    readout_width = 40 * 5 if readout == "flatten" else 5
    assert count_parameters(model) == convolutions + readout_width * 6 + 6


def test_graph_conv_layer_has_taps_times_in_times_out_plus_out():
    shift = shift_operator(knn_graph(np.random.default_rng(0).random((30, 2)), 4))
    model = ShiftPolynomialNet(shift, features=3, channels=[8, 5], classes=6, order=4)
    layers = (5 * 3 * 8 + 8) + (5 * 8 * 5 + 5)
    assert count_parameters(model) == layers + 5 * 6 + 6


def test_convolutional_counts_do_not_grow_with_nodes_while_fc_does():
    def counts(nodes):
        shift = shift_operator(knn_graph(np.random.default_rng(0).random((nodes, 2)), 4))
        return (
            count_parameters(FullyConnected(nodes, 1, [16], 4)),
            count_parameters(LineConv(nodes, 1, [16], 4, order=3)),
            count_parameters(ShiftPolynomialNet(shift, 1, [16], 4, order=3)),
        )

    small, large = counts(20), counts(200)
    assert large[0] - small[0] == 180 * 16
    assert large[1:] == small[1:]


@pytest.mark.parametrize("arch", [
    "fc", "fc hidden=[7,3]", "line_conv", "line_conv readout=flatten normalization=batch",
    "graph_conv", "graph_conv order=0 channels=[4] readout=max normalization=batch",
    "line_conv channels=[6,5,4] orders=[7,4,2]", "graph_conv channels=[6,5] orders=[0,3]",
    "fc head=nodes", "line_conv readout=node head=nodes", "graph_conv readout=node normalization=batch head=nodes",
])
def test_planned_count_equals_the_count_of_the_built_model(arch):
    # Reference: torch's own parameter list (count_parameters sums Parameter.numel()).
    from dataclasses import replace

    from shiftbench.models.fc import FcConfig

    from shiftbench.models.shift_polynomial_net import GraphConvConfig

    from shiftbench.models.line_conv import LineConvConfig
    from shiftbench.models import build_model
    from shiftbench.models.parameters import planned_parameters

    family, *options = arch.split()
    config = {"fc": FcConfig, "line_conv": LineConvConfig, "graph_conv": GraphConvConfig}[family]()
    head = "pooled"
    for option in options:
        key, value = option.split("=")
        if key == "head":
            head = value
            continue
        config = replace(config, **{key: eval(value) if value[0] in "[0123456789" else value})
    nodes, features, classes = 25, 2, 3
    shift = shift_operator(knn_graph(np.random.default_rng(0).random((nodes, 2)), 4))
    model = build_model(config, nodes, features, classes, shift, head)
    assert planned_parameters(config, nodes, features, classes, head) == count_parameters(model)


def test_for_outputs_on_every_node_fc_grows_with_nodes_squared_while_filters_do_not():
    # Common practice, no source: an MLP from nodes inputs to nodes outputs through one hidden
    # layer of width w has (nodes + 1) w + (w + 1) nodes parameters; with w = nodes / 4 that is
    # quadratic in nodes. Graph filters with a per-node output map keep one count at every size.
    from dataclasses import replace

    from shiftbench.models.fc import FcConfig
    from shiftbench.models.parameters import planned_parameters

    def counts(nodes):
        shift = shift_operator(knn_graph(np.random.default_rng(0).random((nodes, 2)), 4))
        fc = FullyConnected(nodes, 1, [nodes // 4], 1, head="nodes")
        graph_conv = ShiftPolynomialNet(shift, 1, [16], 1, order=3, readout="node")
        planned = planned_parameters(replace(FcConfig(), hidden=[nodes // 4]), nodes, 1, 1, "nodes")
        return count_parameters(fc), planned, count_parameters(graph_conv)

    for nodes in (16, 64, 256):
        fc, planned, graph_conv = counts(nodes)
        width = nodes // 4
        assert fc == planned == (nodes + 1) * width + (width + 1) * nodes
        assert graph_conv == counts(16)[2] == 4 * 16 + 16 + 17
    assert counts(256)[0] / counts(64)[0] > 15  # 4x the nodes, about 16x the parameters
