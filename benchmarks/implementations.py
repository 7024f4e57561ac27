"""The graph-filter layer ``Y = sum_{k=0..K} S^k X H_k + b`` five ways, for one benchmark case.

Each implementation gets its input in its own natural layout, prepared outside the timed region,
and one callable that runs the layer: ``shiftbench`` (the family's layer), ``conv1d`` and
``conv2d_channels_last`` (torch's convolutions; line graph only, causal padding), ``tagconv``
(PyG's TAGConv with ``normalize=False`` on the batch as disjoint graph copies, PyG's usual
batching) and ``dense`` (Horner's rule with a dense ``S``; small graphs only).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import torch
from torch import nn

from shiftbench.graphs.graph import Graph
from shiftbench.graphs.sources import grid_graph, knn_graph, line_graph
from shiftbench.models.shift_polynomial import ShiftPolynomialLayer

GRAPHS = ("line", "grid", "knn")
IMPLEMENTATIONS = ("shiftbench", "conv1d", "conv2d_channels_last", "tagconv", "dense")
DENSE_NODES_LIMIT = 1024
# TAGConv keeps one (edges * batch, channels) message tensor a hop for its backward pass;
# cases that would need more than this are left out (and the table says so).
TAGCONV_MESSAGE_LIMIT_BYTES = 4 << 30
KNN_NEIGHBORS = 8


@dataclass(frozen=True)
class Case:
    """One benchmark case: the graph, its size, the batch, the widths, the order, the pass."""

    graph: str
    nodes: int
    batch: int
    channels: int
    order: int
    pass_: str

    def key(self) -> dict:
        return {"graph": self.graph, "nodes": self.nodes, "batch": self.batch, "channels": self.channels,
                "order": self.order, "pass": self.pass_}


def make_graph(name: str, nodes: int) -> Graph:
    """The directed line graph, a square 2-D grid, or a random symmetric k-NN graph (k = 8)."""
    if name == "line":
        return line_graph(nodes)
    if name == "grid":
        side = int(round(nodes**0.5))
        return grid_graph(side, nodes // side)
    return knn_graph(np.random.default_rng(0).random((nodes, 2)), KNN_NEIGHBORS)


def applicable(case: Case, implementation: str, edges: int) -> str | None:
    """Why ``implementation`` is left out of ``case``, or None when it runs."""
    if implementation in ("conv1d", "conv2d_channels_last") and case.graph != "line":
        return "a convolution is the line graph's layer only"
    if implementation == "dense" and case.nodes > DENSE_NODES_LIMIT:
        return f"dense S only up to {DENSE_NODES_LIMIT} nodes"
    messages = edges * case.batch * case.channels * 4 * case.order
    if implementation == "tagconv" and messages > TAGCONV_MESSAGE_LIMIT_BYTES:
        return f"its messages would need {messages / 2**30:.0f} GiB"
    return None


def shared_weights(case: Case, seed: int = 0) -> tuple[torch.Tensor, torch.Tensor]:
    """Taps ``(K + 1, channels, channels)`` and bias ``(channels,)`` every implementation uses."""
    generator = torch.Generator().manual_seed(seed)
    bound = 1.0 / (case.channels * (case.order + 1)) ** 0.5
    taps = (torch.rand(case.order + 1, case.channels, case.channels, generator=generator) * 2 - 1) * bound
    bias = (torch.rand(case.channels, generator=generator) * 2 - 1) * bound
    return taps, bias


def build(
    case: Case, implementation: str, shift: torch.Tensor
) -> tuple[Callable[[], torch.Tensor], torch.Tensor, nn.Module | None]:
    """``(run, input, module)``: ``run()`` computes the layer with the ``(nodes, nodes)`` shift
    on ``input`` and returns ``(batch, nodes, channels)`` (``(batch * nodes, channels)`` for
    tagconv, ``(batch, channels, nodes)`` for conv1d, ``(batch, channels, 1, nodes)`` for
    conv2d_channels_last)."""
    taps, bias = shared_weights(case)
    generator = torch.Generator().manual_seed(1)
    signal = torch.randn(case.batch, case.nodes, case.channels, generator=generator)
    order = case.order
    if implementation == "shiftbench":
        layer = ShiftPolynomialLayer(shift, case.channels, case.channels, order)
        with torch.no_grad():
            layer.taps.copy_(taps)
            layer.bias.copy_(bias)
        return (lambda: layer(signal)), signal, layer
    if implementation == "conv1d":
        conv = _conv1d(taps, bias)
        native = signal.transpose(1, 2).contiguous()  # (batch, channels, nodes)
        return (lambda: conv(nn.functional.pad(native, (order, 0)))), native, conv
    if implementation == "conv2d_channels_last":
        conv = _conv1d(taps, bias)

        def channels_last() -> torch.Tensor:
            view = nn.functional.pad(signal, (0, 0, order, 0)).transpose(1, 2).unsqueeze(2)
            return nn.functional.conv2d(view, conv.weight.unsqueeze(2), conv.bias)

        return channels_last, signal, conv
    if implementation == "tagconv":
        return _tagconv(case, shift, taps, bias, signal)
    if implementation == "dense":
        dense = shift.to_dense()
        weights = nn.ParameterList([nn.Parameter(taps.clone()), nn.Parameter(bias.clone())])

        def horner() -> torch.Tensor:
            y = signal @ weights[0][order]
            for k in range(order - 1, -1, -1):
                y = dense @ y + signal @ weights[0][k]
            return y + weights[1]

        return horner, signal, weights
    raise ValueError(f"unknown implementation {implementation!r}; accepted: {', '.join(IMPLEMENTATIONS)}")


def _conv1d(taps: torch.Tensor, bias: torch.Tensor) -> nn.Conv1d:
    """A Conv1d computing the causal filter: ``W[o, i, K - k] = H_k[i, o]``."""
    kernel_size, channels, _ = taps.shape
    conv = nn.Conv1d(channels, channels, kernel_size=kernel_size)
    with torch.no_grad():
        conv.weight.copy_(taps.flip(0).permute(2, 1, 0))
        conv.bias.copy_(bias)
    return conv


def _tagconv(case: Case, shift: torch.Tensor, taps: torch.Tensor, bias: torch.Tensor, signal: torch.Tensor):
    from torch_geometric.nn import TAGConv

    shift = shift.to_sparse_coo().coalesce()
    # S[i, j] is the weight of edge j -> i; PyG's edge_index holds (source, target) = (j, i).
    rows, columns = shift.indices()
    edges = torch.stack([columns, rows])
    offsets = (torch.arange(case.batch) * case.nodes).repeat_interleave(edges.shape[1])
    edge_index = edges.repeat(1, case.batch) + offsets
    edge_weight = shift.values().repeat(case.batch)
    layer = TAGConv(case.channels, case.channels, K=case.order, normalize=False)
    with torch.no_grad():
        for k, linear in enumerate(layer.lins):
            linear.weight.copy_(taps[k].T)
        layer.bias.copy_(bias)
    flat = signal.reshape(case.batch * case.nodes, case.channels)
    return (lambda: layer(flat, edge_index, edge_weight)), flat, layer
