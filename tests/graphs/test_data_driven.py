"""Graphs built from data: geometric, correlation and signal k-NN; training split only."""

from dataclasses import replace

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from shiftbench.graphs.from_signals import CorrelationGraphConfig

from shiftbench.graphs.sources import GeometricGraphConfig, KnnGraphConfig
from shiftbench.data import sensor_regimes
from shiftbench.data.files import load_signal_file
from shiftbench.graphs.sources import build_graph, geometric_graph


def edge_set(graph):
    return {tuple(pair) for pair in graph.edge_index.T.tolist()}


def test_geometric_graph_matches_networkx_random_geometric_graph():
    # Source: networkx.random_geometric_graph with given positions (edges where distance <= radius).
    positions = np.random.default_rng(0).random((60, 2))
    reference = nx.random_geometric_graph(60, 0.2, pos=dict(enumerate(positions)))
    expected = {(u, v) for u, v in reference.edges} | {(v, u) for u, v in reference.edges}
    assert edge_set(geometric_graph(positions, 0.2)) == expected


def test_correlation_graph_keeps_each_nodes_strongest_absolute_correlations():
    # Reference: pandas.DataFrame.corr (Pearson) on the training signals.
    dataset = sensor_regimes(nodes=20, samples_per_class=30)
    graph = build_graph(CorrelationGraphConfig(neighbors=3), dataset)
    training = pd.DataFrame(dataset.signals[dataset.splits.train, :, 0])
    strength = training.corr().abs().to_numpy(copy=True)
    np.fill_diagonal(strength, 0)
    chosen = {(i, int(j)) for i in range(20) for j in np.argsort(-strength[i])[:3]}
    expected = chosen | {(j, i) for i, j in chosen}
    assert edge_set(graph) == expected
    adjacency = graph.adjacency().toarray()
    for i, j in expected:
        assert adjacency[i, j] == pytest.approx(strength[i, j], rel=1e-5)


@pytest.mark.parametrize(
    "config", [CorrelationGraphConfig(neighbors=4), KnnGraphConfig(neighbors=4)], ids=["correlation", "knn"]
)
def test_signal_graphs_ignore_validation_and_test_signals(tmp_path, config):
    rng = np.random.default_rng(1)
    signals, labels = rng.standard_normal((90, 12)), np.repeat([0, 1, 2], 30)
    np.savez(tmp_path / "data.npz", signals=signals, labels=labels)
    dataset = load_signal_file(str(tmp_path / "data.npz"))
    held_out = np.concatenate([dataset.splits.val, dataset.splits.test])
    changed = dataset.signals.copy()
    changed[held_out] = rng.standard_normal(changed[held_out].shape).astype(np.float32) * 10
    first = build_graph(config, dataset)
    second = build_graph(config, replace(dataset, signals=changed))
    np.testing.assert_array_equal(first.adjacency().toarray(), second.adjacency().toarray())
    changed[dataset.splits.train] += rng.standard_normal(changed[dataset.splits.train].shape).astype(np.float32)
    third = build_graph(config, replace(dataset, signals=changed))
    assert (first.adjacency() != third.adjacency()).nnz > 0


def test_knn_uses_positions_when_the_data_has_them():
    dataset = sensor_regimes(nodes=30, samples_per_class=20)
    graph = build_graph(KnnGraphConfig(neighbors=6), dataset)
    assert edge_set(graph) == edge_set(dataset.native_graph)


def test_geometric_graph_needs_positions(tmp_path):
    np.savez(tmp_path / "data.npz", signals=np.zeros((30, 4)), labels=np.repeat([0, 1, 2], 10))
    with pytest.raises(ValueError, match="needs node positions"):
        build_graph(GeometricGraphConfig(), load_signal_file(str(tmp_path / "data.npz")))


def test_rewiring_keeps_every_degree_and_changes_the_edges():
    # Reference: networkx.double_edge_swap preserves the degree sequence (its documentation).
    from shiftbench.graphs.sources import rewired_graph

    native = sensor_regimes(nodes=80, samples_per_class=20).native_graph
    rewired = rewired_graph(native, swaps_per_edge=5, seed=1)
    degrees = lambda graph: sorted(dict(nx.Graph(graph.to_networkx().to_undirected()).degree()).items())
    assert degrees(rewired) == degrees(native)
    assert rewired.is_symmetric()
    assert len(edge_set(rewired) & edge_set(native)) < 0.5 * len(edge_set(native))


def test_rewiring_a_directed_graph_keeps_every_in_and_out_degree():
    # Reference: networkx.directed_edge_swap preserves in- and out-degrees (its documentation).
    from shiftbench.graphs.graph import Graph
    from shiftbench.graphs.sources import rewired_graph

    native = Graph.from_networkx(nx.gnp_random_graph(60, 0.08, seed=3, directed=True), name="roads")
    rewired = rewired_graph(native, swaps_per_edge=5, seed=1)
    degrees = lambda graph: (sorted(graph.to_networkx().in_degree()), sorted(graph.to_networkx().out_degree()))
    assert degrees(rewired) == degrees(native)
    assert not rewired.is_symmetric()
    assert rewired.name == "roads rewired"
    assert len(edge_set(rewired) & edge_set(native)) < 0.5 * len(edge_set(native))


def test_rewiring_a_graph_without_swappable_edges_is_refused_with_the_reason():
    from shiftbench.errors import ConfigError
    from shiftbench.graphs.sources import line_graph, rewired_graph

    with pytest.raises(ConfigError, match="graph=rewired cannot rewire 'line'"):
        rewired_graph(line_graph(3), swaps_per_edge=1, seed=0)