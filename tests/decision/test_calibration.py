"""The verdict's second question on planted graphs, cheaply: a linear model on how smooth each
signal is on a graph (``x^T S^k x / x^T x``, k = 1, 2) stands in for a graph model, scored over
the study's own outer folds and judged by the study's own comparison and decision rule.

Signals are filtered on a graph A. Against a degree-preserving rewiring (a new one per fold):
the model on A must be said to add; the model on an unrelated graph of A's degrees (a rewiring
of A, so the signals do not live on it) must be said to add nothing, and over many planted null
draws the share of "adds" must stay near ``alpha`` (the corrected resampled t-test's purpose,
Nadeau & Bengio 2003; the plain paired t-test on resampled units rejects far more often,
Dietterich 1998)."""

import networkx as nx
import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.splits import fold_split
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.sources import rewired_graph
from shiftbench.statistics import compare_paired
from shiftbench.verdict import decide

NODES, PER_CLASS, FOLDS = 30, 40, 5


def normalized(graph: Graph) -> np.ndarray:
    adjacency = graph.adjacency().toarray()
    scale = 1 / np.sqrt(np.maximum(adjacency.sum(axis=1), 1))
    return scale[:, None] * adjacency * scale[None, :]


def planted(graph: Graph, seed: int, strength: float) -> Dataset:
    """Three classes: white noise, and noise smoothed or roughened by ``(I +- strength S)^2``."""
    rng = np.random.default_rng(seed)
    shift, identity = normalized(graph), np.eye(NODES)
    filters = [identity, np.linalg.matrix_power(identity + strength * shift, 2), np.linalg.matrix_power(identity - strength * shift, 2)]
    signals = np.stack([filters[c] @ rng.standard_normal(NODES) for c in range(3) for _ in range(PER_CLASS)])
    labels = np.repeat(np.arange(3), PER_CLASS)
    order = np.arange(len(labels))
    splits = Splits(train=order[:72], val=order[72:96], test=order[96:])
    return Dataset(signals[:, :, None].astype(np.float32), labels, splits, 3, graph, "planted")


def smoothness(signals: np.ndarray, graph: Graph) -> np.ndarray:
    """``(samples, 2)``: ``x^T S x / x^T x`` and ``x^T S^2 x / x^T x`` on the graph's normalized adjacency."""
    shift = normalized(graph)
    x = signals[:, :, 0]
    once = x @ shift.T
    energy = (x * x).sum(axis=1)
    return np.stack([(x * once).sum(axis=1) / energy, (once * once).sum(axis=1) / energy], axis=1)


def fold_accuracy(dataset: Dataset, graph: Graph, fold: int) -> float:
    parts = fold_split(dataset, FOLDS, fold).splits
    train = np.concatenate([parts.train, parts.val])
    features = smoothness(dataset.signals, graph)
    model = LogisticRegression(max_iter=500).fit(features[train], dataset.labels[train])
    return float(model.score(features[parts.test], dataset.labels[parts.test]))


def graph_outcome(dataset: Dataset, graph: Graph) -> str:
    """The verdict's rule on ``graph`` against a new rewiring of it per fold."""
    on_graph = [fold_accuracy(dataset, graph, fold) for fold in range(FOLDS)]
    on_control = [fold_accuracy(dataset, rewired_graph(graph, 5.0, 100 + fold), fold) for fold in range(FOLDS)]
    comparison = compare_paired(np.array(on_graph), np.array(on_control), rope=0.01, folds=FOLDS)
    return decide(comparison, comparison.p, rope=0.01, alpha=0.05)


@pytest.fixture(scope="module")
def graphs() -> tuple[Graph, Graph]:
    true = Graph.from_networkx(nx.random_regular_graph(4, NODES, seed=0), name="true")
    return true, rewired_graph(true, 5.0, 99)


def test_the_graph_the_signals_live_on_is_said_to_add_beyond_its_degrees(graphs):
    true, _ = graphs
    assert graph_outcome(planted(true, 0, 0.9), true) == "earns_its_keep"


def test_over_planted_null_draws_an_unrelated_graph_is_rarely_said_to_add(graphs):
    true, unrelated = graphs
    outcomes = [graph_outcome(planted(true, seed, 0.9), unrelated) for seed in range(30)]
    share = outcomes.count("earns_its_keep") / len(outcomes)
    assert share <= 0.15, outcomes  # alpha 0.05; 0.15 is about three binomial deviations above it for 30 draws
