"""The demo scenario: classes differ in graph-spectral signature, not in level or energy."""

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from shiftbench.config import TrainConfig

from shiftbench.models.shift_polynomial_net import GraphConvConfig
from shiftbench.data.sensor_regimes import regime_responses, sensor_regimes
from shiftbench.graphs.operators import shift_operator
from shiftbench.models import build_model
from shiftbench.training import seed_everything, train


@pytest.fixture(scope="module")
def dataset():
    return sensor_regimes()


def test_mean_and_variance_across_nodes_carry_no_class_information(dataset):
    # A linear classifier on each recording's mean and variance should sit at chance
    # (1 / classes = 0.25); common practice, no source.
    values = dataset.signals[:, :, 0]
    features = np.stack([values.mean(axis=1), values.var(axis=1)], axis=1)
    train, test = dataset.splits.train, dataset.splits.test
    classifier = LogisticRegression().fit(features[train], dataset.labels[train])
    assert classifier.score(features[test], dataset.labels[test]) < 0.25 + 0.1


def test_graph_conv_on_the_native_graph_separates_the_regimes(dataset):
    seed_everything(0)
    shift = shift_operator(dataset.native_graph)
    model = build_model(GraphConvConfig(), dataset.nodes, dataset.features, dataset.classes, shift)
    result = train(model, dataset, TrainConfig(epochs=40), seed=0)
    assert result.test_score > 0.85


def test_splits_are_disjoint_stratified_and_cover_every_sample(dataset):
    splits = dataset.splits
    together = np.concatenate([splits.train, splits.val, splits.test])
    assert np.array_equal(np.sort(together), np.arange(dataset.samples))
    for part in (splits.train, splits.val, splits.test):
        shares = np.bincount(dataset.labels[part], minlength=dataset.classes) / len(part)
        np.testing.assert_allclose(shares, 1 / dataset.classes, atol=0.02)


def test_the_data_seed_fixes_signals_and_splits():
    first, again, other = sensor_regimes(seed=3), sensor_regimes(seed=3), sensor_regimes(seed=4)
    np.testing.assert_array_equal(first.signals, again.signals)
    np.testing.assert_array_equal(first.splits.test, again.splits.test)
    assert not np.array_equal(first.signals, other.signals)


def test_each_regime_response_peaks_at_its_own_place_on_the_spectrum():
    coefficients = regime_responses(classes=4, order=6)
    peaks = np.linspace(-0.85, 0.85, 4)
    responses = np.array([[np.polyval(row[::-1], peak) for peak in peaks] for row in coefficients])
    assert (responses.argmax(axis=1) == np.arange(4)).all()


def test_generation_scales_to_large_networks_with_sparse_products():
    dataset = sensor_regimes(nodes=20_000, classes=3, samples_per_class=10)
    assert dataset.signals.shape == (30, 20_000, 1)
    assert np.isfinite(dataset.signals).all()
