"""A trained graph_conv under a changed graph: perturbed edges, and networks of other sizes.

A graph_conv's weights do not depend on the graph, so the same model runs on any shift
operator: swapping in a perturbed or larger graph tests what its filters learned.
"""

from __future__ import annotations

import copy
from dataclasses import replace

import numpy as np
import pandas as pd
import torch

from shiftbench.data.dataset import Dataset
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import from_simple, rewired_graph, simple_graph
from shiftbench.models.shift_polynomial_net import ShiftPolynomialNet
from shiftbench.models.shift_products import plan
from shiftbench.registry import TASKS, Task

FRACTIONS = (0.0, 0.01, 0.05, 0.10, 0.20)
MODES = ("drop", "rewire")


def perturbed_graph(graph: Graph, fraction: float, mode: str, seed: int) -> Graph:
    """``graph`` with ``fraction`` of its edges dropped at random, or moved by degree-preserving
    swaps (each swap moves two edges; a directed graph keeps in- and out-degrees)."""
    if mode == "rewire":
        return replace(rewired_graph(graph, fraction / 2, seed), name=f"{graph.name}_{mode}")
    simple = simple_graph(graph)
    edges = list(simple.edges)
    count = int(round(fraction * len(edges)))
    chosen = np.random.default_rng(seed).choice(len(edges), size=count, replace=False) if count else []
    simple.remove_edges_from([edges[index] for index in chosen])
    return from_simple(simple, graph, f"{graph.name}_{mode}")


def on_shift(model: ShiftPolynomialNet, shift: torch.Tensor) -> ShiftPolynomialNet:
    """A copy of ``model`` whose every layer filters with ``shift`` (any node count)."""
    # Sparse tensors cannot be deep-copied: hand the copy the new shift, and a plan for it, in
    # place of the old ones.
    memo: dict[int, object] = {}
    for layer in model.layers:
        memo[id(layer.shift)] = shift
        if id(layer.plan) not in memo:
            memo[id(layer.plan)] = plan(shift, layer.structured)
    return copy.deepcopy(model, memo=memo)


def score_on_test(model: torch.nn.Module, dataset: Dataset, task: Task | None = None) -> float:
    """The task's primary metric (classification's accuracy by default) of ``model`` on the
    test split."""
    task = task or TASKS["classification"]
    model.eval()
    test = dataset.splits.test
    with torch.no_grad():
        outputs = model(torch.from_numpy(dataset.signals[test]))
    return task.score(outputs, torch.from_numpy(dataset.labels[test]))


def perturbation_table(
    model: ShiftPolynomialNet, dataset: Dataset, graph: Graph, operator: str, scale: str,
    fractions: tuple[float, ...] = FRACTIONS, draws: int = 5, task: Task | None = None,
) -> pd.DataFrame:
    """The task's test figure with each fraction of edges dropped or rewired, ``draws`` random
    draws each.

    Returns:
        Rows ``mode, fraction, draw, test_<metric>`` (``test_accuracy`` for classification).
    """
    task = task or TASKS["classification"]
    rows = []
    for mode in MODES:
        for fraction in fractions:
            for draw in range(draws if fraction else 1):
                changed = perturbed_graph(graph, fraction, mode, seed=draw)
                figure = score_on_test(on_shift(model, shift_operator(changed, operator, scale)), dataset, task)
                rows.append({"mode": mode, "fraction": fraction, "draw": draw, f"test_{task.metric}": figure})
    return pd.DataFrame(rows)


def transfer_table(
    model: ShiftPolynomialNet, datasets: list[tuple[Dataset, Graph]], operator: str, scale: str, task: Task | None = None
) -> pd.DataFrame:
    """The task's test figure of the unchanged ``model`` on each dataset with its graph.

    Returns:
        Rows ``nodes, test_<metric>``.
    """
    task = task or TASKS["classification"]
    rows = []
    for dataset, graph in datasets:
        shift = shift_operator(graph, operator, scale)
        rows.append({"nodes": dataset.nodes, f"test_{task.metric}": score_on_test(on_shift(model, shift), dataset, task)})
    return pd.DataFrame(rows)
