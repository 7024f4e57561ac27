"""A graph filter on the directed line graph (cycle) is a causal (circular) Conv1d, both in its
structured plan (a delay run as a convolution) and in the generic sparse plan.

Source: PyTorch's torch.nn.Conv1d documentation: Conv1d computes a cross-correlation,
``out[o, n] = b[o] + sum_i sum_j W[o, i, j] x[i, n + j]``, so a causal filter with taps
``H_k`` (applied to ``x_{n-k}``) has weight ``W[o, i, j] = H_{K-j}[i, o]``.
"""

import numpy as np
import pytest
import torch
from hypothesis import given, settings
from hypothesis import strategies as st

from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import cycle_graph, line_graph
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer

shapes = st.tuples(
    st.integers(1, 8),  # in channels
    st.integers(1, 8),  # out channels
    st.integers(0, 6),  # order
    st.integers(1, 50),  # nodes
    st.integers(1, 4),  # batch
    st.integers(0, 2**31 - 1),  # seed
)


def conv1d_with_mapped_taps(layer: ShiftPolynomialLayer) -> torch.nn.Conv1d:
    conv = torch.nn.Conv1d(layer.in_channels, layer.out_channels, kernel_size=layer.order + 1)
    with torch.no_grad():
        # taps (K+1, in, out) -> weight (out, in, K+1) with the tap axis reversed.
        conv.weight.copy_(layer.taps.flip(0).permute(2, 1, 0))
        conv.bias.copy_(layer.bias)
    return conv


def random_filter_and_input(shape, make_graph, structured) -> tuple[ShiftPolynomialLayer, torch.Tensor]:
    in_channels, out_channels, order, nodes, batch, seed = shape
    torch.manual_seed(seed)
    shift = shift_operator(make_graph(nodes), "adjacency", "none")
    layer = ShiftPolynomialLayer(shift, in_channels, out_channels, order, structured=structured)
    return layer, torch.randn(batch, nodes, in_channels)


@pytest.mark.parametrize("structured", [True, False], ids=["delay_plan", "sparse_plan"])
@settings(max_examples=40, deadline=None)
@given(shape=shapes)
def test_graph_filter_on_the_line_graph_equals_causal_conv1d(shape, structured):
    layer, x = random_filter_and_input(shape, line_graph, structured)
    order = layer.order
    reference = conv1d_with_mapped_taps(layer)(torch.nn.functional.pad(x.transpose(1, 2), (order, 0)))
    torch.testing.assert_close(layer(x), reference.transpose(1, 2), atol=1e-5, rtol=1e-5)


@pytest.mark.parametrize("structured", [True, False], ids=["delay_plan", "sparse_plan"])
@settings(max_examples=40, deadline=None)
@given(shape=shapes)
def test_graph_filter_on_the_directed_cycle_equals_circular_causal_conv1d(shape, structured):
    layer, x = random_filter_and_input(shape, cycle_graph, structured)
    order = layer.order
    # numpy's "wrap" padding repeats the signal periodically, also for pads longer than it.
    wrapped = torch.from_numpy(np.pad(x.transpose(1, 2).numpy(), ((0, 0), (0, 0), (order, 0)), mode="wrap"))
    reference = conv1d_with_mapped_taps(layer)(wrapped)
    torch.testing.assert_close(layer(x), reference.transpose(1, 2), atol=1e-5, rtol=1e-5)


def test_line_conv_family_layer_equals_graph_filter_on_the_line_graph():
    from shiftbench.models.line_conv import CausalConv1d

    torch.manual_seed(0)
    layer = ShiftPolynomialLayer(shift_operator(line_graph(20), "adjacency", "none"), 3, 5, 4)
    causal = CausalConv1d(3, 5, 4, boundary="zero")
    causal.conv.load_state_dict(conv1d_with_mapped_taps(layer).state_dict())
    x = torch.randn(2, 20, 3)
    torch.testing.assert_close(causal(x), layer(x), atol=1e-5, rtol=1e-5)


@pytest.mark.parametrize("boundary", ["zero", "circular"])
def test_causal_convolution_equals_torch_conv1d_on_the_padded_signal(boundary):
    # Reference: torch.nn.Conv1d on the explicitly padded (batch, channels, nodes) signal; the
    # layer itself runs a channels-last Conv2d.
    from shiftbench.models.line_conv import CausalConv1d

    torch.manual_seed(3)
    layer = CausalConv1d(4, 6, 5, boundary=boundary)
    x = torch.randn(7, 33, 4)
    mode = "constant" if boundary == "zero" else "wrap"
    padded = torch.from_numpy(np.pad(x.transpose(1, 2).numpy(), ((0, 0), (0, 0), (5, 0)), mode=mode))
    torch.testing.assert_close(layer(x), layer.conv(padded).transpose(1, 2), atol=1e-5, rtol=1e-5)


def test_delay_plan_gradients_equal_the_sparse_plan_gradients():
    torch.manual_seed(4)
    shift = shift_operator(line_graph(40), "adjacency", "none")
    fast = ShiftPolynomialLayer(shift, 3, 4, 3)
    generic = ShiftPolynomialLayer(shift, 3, 4, 3, structured=False)
    generic.load_state_dict(fast.state_dict())
    x = torch.randn(6, 40, 3, requires_grad=True)
    grads = [torch.autograd.grad(layer(x).square().sum(), (x, layer.taps, layer.bias)) for layer in (fast, generic)]
    for fast_grad, generic_grad in zip(*grads):
        torch.testing.assert_close(fast_grad, generic_grad, atol=1e-5, rtol=1e-5)


@pytest.mark.parametrize("order", [4, 5])  # odd and even kernel sizes
@pytest.mark.parametrize("boundary", ["zero", "circular"])
def test_same_padding_equals_torch_conv1d_with_padding_same(order, boundary):
    # Reference: torch.nn.Conv1d(padding="same") (floor(K/2) before, the rest after), with
    # padding_mode "zeros" or "circular", sharing the layer's weights.
    from shiftbench.models.line_conv import CausalConv1d

    torch.manual_seed(5)
    layer = CausalConv1d(3, 4, order, boundary=boundary, padding="same")
    reference = torch.nn.Conv1d(3, 4, order + 1, padding="same", padding_mode="zeros" if boundary == "zero" else "circular")
    reference.load_state_dict(layer.conv.state_dict())
    x = torch.randn(6, 29, 3)
    torch.testing.assert_close(layer(x), reference(x.transpose(1, 2)).transpose(1, 2), atol=1e-5, rtol=1e-5)


def test_line_conv_takes_same_padding_from_its_config(small_config):
    from shiftbench.config import validate
    from shiftbench.models import build_model

    arch = validate(small_config("arch=line_conv", "arch.padding=same")).arch
    model = build_model(arch, 24, 1, 4, None)
    assert all(layer.padding == "same" for layer in model.layers)


def test_per_layer_kernels_with_same_padding_equal_a_stack_of_torch_conv1d(small_config):
    # Reference: torch.nn.Conv1d(padding="same") layers of kernel sizes 8, 5, 3, each followed by
    # batch norm and ReLU, then the mean over time and a linear map: the fully convolutional
    # network of Wang et al. 2017 ("Time series classification from scratch with deep neural
    # networks: a strong baseline", IJCNN), built here from torch's modules directly.
    from shiftbench.config import validate
    from shiftbench.models import build_model

    arch = validate(small_config(
        "arch=line_conv", "arch.orders=[7,4,2]", "arch.channels=[6,5,4]", "arch.padding=same", "arch.normalization=batch",
    )).arch
    assert arch.order == 7  # the highest power in the stack
    torch.manual_seed(3)
    model = build_model(arch, 30, 2, 3, None).eval()
    reference = []
    for layer, norm in zip(model.layers, model.norms):
        conv = torch.nn.Conv1d(layer.conv.in_channels, layer.conv.out_channels, layer.conv.kernel_size[0], padding="same")
        conv.load_state_dict(layer.conv.state_dict())
        batch_norm = torch.nn.BatchNorm1d(conv.out_channels)
        batch_norm.load_state_dict(norm.norm.state_dict())
        reference += [conv, batch_norm.eval(), torch.nn.ReLU()]
    assert [conv.kernel_size[0] for conv in reference[::3]] == [8, 5, 3]
    x = torch.randn(5, 30, 2)
    pooled = torch.nn.Sequential(*reference)(x.transpose(1, 2)).mean(dim=2)
    torch.testing.assert_close(model(x), model.readout.linear(pooled), atol=1e-5, rtol=1e-5)


def test_per_layer_orders_need_one_order_a_layer(small_config):
    from shiftbench.config import ConfigError, validate

    with pytest.raises(ConfigError, match=r"arch\.orders=\[7, 4\] is not accepted; accepted: one order a layer: 3 values"):
        validate(small_config("arch=line_conv", "arch.orders=[7,4]", "arch.channels=[6,5,4]"))


def test_without_a_readout_a_graph_filter_stack_on_the_line_graph_equals_a_causal_cnn_producing_a_sequence():
    # Reference: torch.nn.Conv1d layers on the left-padded signal (causal), each followed by ReLU,
    # then a kernel-1 Conv1d as the per-node output map: a 1-D CNN that outputs a sequence.
    from shiftbench.models.line_conv import LineConv
    from shiftbench.models.mapping import line_conv_to_graph_conv

    torch.manual_seed(4)
    nodes, orders = 25, [3, 2]
    cnn = LineConv(nodes, 2, [6, 5], 3, orders, readout="node").eval()
    gnn = line_conv_to_graph_conv(cnn, shift_operator(line_graph(nodes), "adjacency", "none")).eval()
    reference = []
    for layer, order in zip(cnn.layers, orders):
        conv = torch.nn.Conv1d(layer.conv.in_channels, layer.conv.out_channels, order + 1)
        conv.load_state_dict(layer.conv.state_dict())
        reference += [torch.nn.ConstantPad1d((order, 0), 0.0), conv, torch.nn.ReLU()]
    output_map = torch.nn.Conv1d(5, 3, 1)
    with torch.no_grad():
        output_map.weight.copy_(cnn.readout.linear.weight[:, :, None])
        output_map.bias.copy_(cnn.readout.linear.bias)
    x = torch.randn(4, nodes, 2)
    sequence = torch.nn.Sequential(*reference, output_map)(x.transpose(1, 2)).transpose(1, 2)
    assert gnn(x).shape == (4, nodes, 3)
    torch.testing.assert_close(cnn(x), sequence, atol=1e-5, rtol=1e-5)
    torch.testing.assert_close(gnn(x), sequence, atol=1e-5, rtol=1e-5)
