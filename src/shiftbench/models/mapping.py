"""Weight transfer between a 1-D CNN and a GNN on the line graph (or cycle).

A causal Conv1d with weight ``W[o, i, j]`` (kernel size ``K + 1``) computes
``y_n = sum_j W[o, i, j] x_{n-K+j}``; a graph filter on the directed line graph computes
``y_n = sum_k H_k[i, o] x_{n-k}``. They agree when ``H_k[i, o] = W[o, i, K - k]``.
"""

from __future__ import annotations

import torch

from shiftbench.models.line_conv import LineConv
from shiftbench.models.shift_polynomial import kernel_to_taps
from shiftbench.models.shift_polynomial_net import ShiftPolynomialNet


def line_conv_to_graph_conv(model: LineConv, shift: torch.Tensor, taps_from=kernel_to_taps) -> ShiftPolynomialNet:
    """A ShiftPolynomialNet on ``shift`` (the line graph's or cycle's adjacency) carrying ``model``'s
    weights: the taps from each Conv1d kernel, and the same biases, norms and readout. The
    graph_conv runs the generic sparse plan, so that comparing the two checks the algebra, not
    a convolution against itself.

    Args:
        taps_from: the kernel-to-taps map (replaceable, so a test can plant a broken one).
    """
    first = model.layers[0].conv
    channels = [layer.conv.out_channels for layer in model.layers]
    graph_model = ShiftPolynomialNet(
        shift, first.in_channels, channels, model.readout.linear.out_features,
        [layer.order for layer in model.layers],
        nonlinearity=model.nonlinearity, readout=model.readout.kind, dropout=model.dropout.p,
        normalization=model.normalization, structured=False,
    )
    with torch.no_grad():
        for conv_layer, graph_layer in zip(model.layers, graph_model.layers):
            graph_layer.taps.copy_(taps_from(conv_layer.conv.weight))
            graph_layer.bias.copy_(conv_layer.conv.bias)
        graph_model.norms.load_state_dict(model.norms.state_dict())
        graph_model.readout.load_state_dict(model.readout.state_dict())
    return graph_model
