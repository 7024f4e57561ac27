"""The node-level demo scenarios: shapes, targets, seeding, and that the graph carries what is to
be predicted (a predictor that reads the graph beats the best one that does not)."""

import numpy as np
import pytest
from sklearn.linear_model import LinearRegression

from shiftbench.data.sensor_dynamics import diffusion, sensor_forecast, sensor_reconstruction
from shiftbench.graphs.operators import normalized_adjacency


def rmse(predicted, truth):
    return float(np.sqrt(np.mean((predicted - truth) ** 2)))


def test_forecast_samples_hold_the_last_snapshots_and_the_next_one_as_target():
    data = sensor_forecast(nodes=30, samples=50, window=4)
    assert data.signals.shape == (50, 30, 4) and data.labels.shape == (50, 30, 1)
    assert data.signals.dtype == np.float32 and not np.isnan(data.labels).any()
    again = sensor_forecast(nodes=30, samples=50, window=4)
    assert np.array_equal(data.signals, again.signals) and np.array_equal(data.labels, again.labels)
    splits = data.splits
    assert sorted(np.concatenate([splits.train, splits.val, splits.test]).tolist()) == list(range(50))


def test_forecasting_on_the_graph_beats_the_best_predictor_from_each_sensors_own_past():
    # The process itself (its H(S) applied to the last snapshot) is the best one-step forecast;
    # least squares on each sensor's own window (scikit-learn's LinearRegression, pooled over
    # sensors) is the best graph-free linear one. The gap is what a graph model can gain.
    data = sensor_forecast()
    shift = normalized_adjacency(data.native_graph)
    train, test = data.splits.train, data.splits.test
    truth = data.labels[:, :, 0]
    graph_forecast = diffusion(shift, data.signals[:, :, -1].T.astype(np.float64), 0.98, 0.9, 1).T
    window = data.signals.shape[2]
    own_past = LinearRegression().fit(data.signals[train].reshape(-1, window), truth[train].reshape(-1))
    own_forecast = own_past.predict(data.signals[test].reshape(-1, window))
    floor = rmse(truth[train].mean(axis=0), truth[test])
    assert rmse(graph_forecast[test], truth[test]) < 0.92 * rmse(own_forecast, truth[test].reshape(-1)) < 0.92 * floor


def test_reconstruction_targets_are_the_failed_sensors_and_nothing_else():
    data = sensor_reconstruction(nodes=20, samples=80, masked=0.3)
    readings, working = data.signals[:, :, 0], data.signals[:, :, 1]
    failed = ~np.isnan(data.labels[:, :, 0])
    assert set(np.unique(working)) == {0.0, 1.0} and np.array_equal(failed, working == 0)
    assert (readings[failed] == 0).all()
    assert failed.any(axis=1).all() and (~failed).any(axis=1).all()  # one of each in every sample
    assert 0.2 < failed.mean() < 0.4


def test_reconstructing_from_graph_neighbours_beats_the_mean_and_a_rewired_graph():
    # The mean of a failed sensor's working neighbours on the sensor network against the same on
    # a graph with the same degrees and random links (networkx's double edge swap), and against
    # each sensor's training mean.
    import networkx as nx

    from shiftbench.graphs.graph import Graph

    data = sensor_reconstruction()
    readings, working = data.signals[:, :, 0].astype(np.float64), data.signals[:, :, 1].astype(np.float64)
    truth = data.labels[:, :, 0]
    test = np.zeros(len(truth), dtype=bool)
    test[data.splits.test] = True
    scored = ~np.isnan(truth) & test[:, None]

    def neighbour_mean(graph) -> float:
        links = (normalized_adjacency(graph) != 0).astype(np.float64)
        total, count = (links @ (readings * working).T).T, (links @ working.T).T
        estimate = np.where(count > 0, total / np.maximum(count, 1), 0.0)
        return rmse(estimate[scored], truth[scored])

    rewired = data.native_graph.to_undirected_simple()
    nx.double_edge_swap(rewired, nswap=4 * rewired.number_of_edges(), max_tries=10**6, seed=0)
    floor = rmse(np.broadcast_to(np.nanmean(truth[data.splits.train], axis=0), truth.shape)[scored], truth[scored])
    on_graph = neighbour_mean(data.native_graph)
    assert on_graph < 0.92 * floor
    assert on_graph < 0.92 * neighbour_mean(Graph.from_undirected_simple(rewired, data.nodes, "rewired"))


@pytest.mark.parametrize("knob", ["data.masked=1.0", "data.decay=1.5", "data.hops=0"])
def test_bad_knobs_get_one_line(knob):
    from shiftbench.config import ConfigError, validate
    from tests.conftest import composed

    with pytest.raises(ConfigError, match=rf"{knob.split('=')[0].split('.')[1]}=.* is not accepted; accepted: "):
        validate(composed(["task=node_regression", "data=sensor_reconstruction", knob]))


def test_leak_samples_label_the_source_node_and_hold_its_spread():
    from shiftbench.data.sensor_dynamics import sensor_leak

    data = sensor_leak(nodes=30, samples=80, window=3, amplitude=50.0)
    assert data.signals.shape == (80, 30, 3) and data.labels.shape == (80,) and data.labels.dtype == np.int64
    assert 0 <= data.labels.min() and data.labels.max() < 30
    # With a loud leak, the source reads highest in the first snapshot seen (it spreads from there).
    assert (data.signals[:, :, 0].argmax(axis=1) == data.labels).mean() > 0.9


def test_locating_the_leak_through_the_graph_beats_the_loudest_sensor():
    # A matched filter on the sensor network (each node's expected spread, D^t e_s over the
    # window, averaged over the start delays, D = (1 - mixing) I + mixing S) against naming the
    # loudest sensor of the last snapshot (graph-free), and against chance (1 / nodes).
    from shiftbench.data.sensor_dynamics import sensor_leak

    data = sensor_leak()
    nodes, window, mixing, delay = data.nodes, data.features, 0.5, 3
    spread = (1 - mixing) * np.eye(nodes) + mixing * normalized_adjacency(data.native_graph).toarray()
    templates = np.zeros((nodes, window * nodes))
    for start in range(1, delay + 1):
        templates += np.concatenate([np.linalg.matrix_power(spread, start + step).T for step in range(window)], axis=1)
    templates /= np.linalg.norm(templates, axis=1, keepdims=True)
    seen = data.signals.transpose(0, 2, 1).reshape(data.samples, -1)  # (samples, window * nodes), window-major
    matched = float(((seen @ templates.T).argmax(axis=1) == data.labels).mean())
    loudest = float((data.signals[:, :, -1].argmax(axis=1) == data.labels).mean())
    assert matched > loudest + 0.08 and matched > 20 / nodes


def test_sizing_a_leak_through_the_graph_beats_sizing_it_by_the_loudest_sensor():
    # The size read off the best-matching spread on the sensor network (the matched filter's
    # peak, scaled by least squares on the training split) against the same scaling of the
    # loudest reading (graph-free), and the mean size (the floor).
    from shiftbench.data.sensor_dynamics import sensor_leak_size

    data = sensor_leak_size()
    sizes, train, test = data.labels[:, 0], data.splits.train, data.splits.test
    assert data.labels.shape == (data.samples, 1) and 0 <= sizes.min() and sizes.max() <= 30
    nodes, window, mixing, delay = data.nodes, data.features, 0.5, 3
    spread = (1 - mixing) * np.eye(nodes) + mixing * normalized_adjacency(data.native_graph).toarray()
    templates = sum(
        np.concatenate([np.linalg.matrix_power(spread, start + step).T for step in range(window)], axis=1)
        for start in range(1, delay + 1)
    )
    seen = data.signals.transpose(0, 2, 1).reshape(data.samples, -1)
    matched = (seen @ templates.T / np.linalg.norm(templates, axis=1)).max(axis=1)
    loudest = data.signals.max(axis=(1, 2))

    def scaled_error(feature):
        slope, intercept = np.polyfit(feature[train], sizes[train], 1)
        return rmse(slope * feature[test] + intercept, sizes[test])

    floor = rmse(sizes[train].mean(), sizes[test])
    assert scaled_error(matched) < 0.93 * scaled_error(loudest) < 0.8 * floor


def test_zones_give_every_sensor_its_zones_regime():
    from shiftbench.data.sensor_regimes import sensor_zones, zone_of_each_node

    data = sensor_zones(nodes=30, zones=3, classes=3, samples=50, snapshots=2)
    assert data.signals.shape == (50, 30, 2) and data.labels.shape == (50, 30) and data.labels.dtype == np.int64
    zone = zone_of_each_node(data.native_graph.positions.numpy().astype(np.float64), 3, 0)
    for sample in data.labels:  # one regime a zone
        assert all(len(set(sample[zone == z])) == 1 for z in range(3))


def test_a_sensors_regime_shows_in_how_it_varies_with_its_neighbours_not_in_its_own_readings():
    # Scikit-learn's LDA on each sensor's own features: with the graph, its mean product with
    # its neighbours' weighted readings (x * Sx, over the snapshots) beside its energy; without
    # it, its energy and mean absolute reading (the readings are standardized per recording).
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    from shiftbench.data.sensor_regimes import sensor_zones

    data = sensor_zones()
    x = data.signals.astype(np.float64)
    neighbours = np.einsum("ij,sjk->sik", normalized_adjacency(data.native_graph).toarray(), x)
    with_graph = np.stack([(x * neighbours).mean(axis=2), (x**2).mean(axis=2)], axis=2)
    without = np.stack([(x**2).mean(axis=2), np.abs(x).mean(axis=2)], axis=2)
    train, test = data.splits.train, data.splits.test

    def accuracy(features):
        model = LinearDiscriminantAnalysis().fit(features[train].reshape(-1, 2), data.labels[train].ravel())
        return float((model.predict(features[test].reshape(-1, 2)) == data.labels[test].ravel()).mean())

    assert accuracy(with_graph) > accuracy(without) + 0.15
