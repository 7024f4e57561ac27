"""The demo scenario: pressure sensors on a pipe network under distinct operating regimes.

Sensors sit at random positions in the unit square, each linked to its nearest neighbours (the
native graph). A recording is a snapshot of every sensor during one regime. Regimes differ in how
disturbances spread through the pipes: a recording is

    x = standardize(H_c(S) w) + noise * n,      H_c(S) = sum_{k=0..K} a_{c,k} S^k,

with ``w`` and ``n`` white Gaussian, ``S`` the network's normalized adjacency (eigenvalues in
[-1, 1]) and ``H_c`` a polynomial whose frequency response ``h_c(lambda)`` is a bump centred at a
regime's own place on the spectrum (low-pass, band-pass, ..., high-pass). ``standardize`` gives each
recording zero mean and unit variance across sensors, so the level and energy of a recording carry
no class information: only how readings co-vary across linked sensors does.

Generation uses sparse products only (no eigendecomposition), so it scales to large networks.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from numpy.polynomial import chebyshev

from shiftbench.config import at_least, declared, require
from shiftbench.data.dataset import Dataset, keyword_loader
from shiftbench.data.splits import RandomSplitConfig, random_splits, stratified_splits
from shiftbench.graphs.operators import normalized_adjacency
from shiftbench.graphs.standard import knn_graph
from shiftbench.registry import DATASETS, DatasetSource

# Where on [-1, 1] the regimes' responses peak, and how wide each bump is (in units of the
# spacing between neighbouring peaks): wide enough to overlap, so no regime is trivial.
SPECTRUM_EDGE = 0.85
BUMP_WIDTH = 0.6


def regime_responses(classes: int, order: int) -> np.ndarray:
    """Power-basis coefficients ``a_{c,k}`` of each regime's polynomial filter.

    Regime ``c``'s response is a least-squares Chebyshev fit of degree ``order`` to
    ``exp(-(lambda - mu_c)^2 / (2 sigma^2))`` on [-1, 1], with peaks ``mu_c`` evenly spaced.

    Returns:
        ``(classes, order + 1)`` float64; row ``c`` holds ``a_{c,0} .. a_{c,order}``.
    """
    peaks = np.linspace(-SPECTRUM_EDGE, SPECTRUM_EDGE, classes)
    width = BUMP_WIDTH * (2 * SPECTRUM_EDGE / max(classes - 1, 1))
    grid = np.linspace(-1.0, 1.0, 512)
    coefficients = np.zeros((classes, order + 1))
    for c, peak in enumerate(peaks):
        response = np.exp(-((grid - peak) ** 2) / (2 * width**2))
        fit = chebyshev.chebfit(grid, response, order)
        power = chebyshev.cheb2poly(fit)
        coefficients[c, : len(power)] = power
    return coefficients


def apply_polynomial(shift: sp.spmatrix, coefficients: np.ndarray, signals: np.ndarray) -> np.ndarray:
    """``sum_k a_k S^k X`` by Horner's rule (``order`` sparse products).

    Args:
        shift: ``(nodes, nodes)`` sparse ``S``.
        coefficients: ``(order + 1,)`` power-basis coefficients ``a_0 .. a_order``.
        signals: ``(nodes, columns)`` dense ``X``.

    Returns:
        ``(nodes, columns)``.
    """
    result = coefficients[-1] * signals
    for coefficient in coefficients[-2::-1]:
        result = shift @ result + coefficient * signals
    return result


def sensor_regimes(
    nodes: int = 64,
    classes: int = 4,
    samples_per_class: int = 200,
    noise: float = 0.5,
    process_order: int = 6,
    neighbors: int = 6,
    seed: int = 0,
    val_fraction: float = 0.2,
    test_fraction: float = 0.2,
) -> Dataset:
    """Generate the demo scenario; everything random is drawn from ``seed``.

    Returns:
        A dataset with signals ``(classes * samples_per_class, nodes, 1)``.
    """
    rng = np.random.default_rng(seed)
    positions = rng.random((nodes, 2))
    graph = replace(knn_graph(positions, neighbors), name="sensor_network")
    shift = normalized_adjacency(graph)
    responses = regime_responses(classes, process_order)

    recordings = []
    for response in responses:
        white = rng.standard_normal((nodes, samples_per_class))
        filtered = apply_polynomial(shift, response, white).T
        filtered -= filtered.mean(axis=1, keepdims=True)
        filtered /= filtered.std(axis=1, keepdims=True) + 1e-12
        recordings.append(filtered + noise * rng.standard_normal(filtered.shape))
    signals = np.concatenate(recordings).astype(np.float32)[:, :, None]
    labels = np.repeat(np.arange(classes, dtype=np.int64), samples_per_class)

    order = rng.permutation(len(labels))
    signals, labels = signals[order], labels[order]
    return Dataset(
        signals=signals,
        labels=labels,
        splits=stratified_splits(labels, val_fraction, test_fraction, seed),
        classes=classes,
        native_graph=graph,
        name="sensor_regimes",
    )


@dataclass
class SensorRegimesConfig(RandomSplitConfig):
    """The demo scenario's size, noise and process (see the module's description)."""

    source: str = "sensor_regimes"
    nodes: int = declared(at_least(2), 64)
    classes: int = declared(at_least(2), 4)
    samples_per_class: int = declared(at_least(10), 200)
    noise: float = declared(at_least(0, "a number"), 0.5)
    process_order: int = declared(at_least(0), 6)
    neighbors: int = 6

    def check(self) -> None:
        super().check()
        require(
            "neighbors", self.neighbors, 1 <= self.neighbors < self.nodes, f"an integer in 1..{self.nodes - 1}"
        )

    def known_nodes(self) -> int | None:
        return self.nodes

    def known_samples(self) -> int | None:
        return self.samples_per_class * self.classes


DATASETS.add(DatasetSource("sensor_regimes", SensorRegimesConfig, keyword_loader(sensor_regimes), "demo: sensor regimes"))


def zone_of_each_node(positions: np.ndarray, zones: int, seed: int) -> np.ndarray:
    """Zones of the network: scikit-learn's k-means of the sensor positions, ``(nodes,)`` in
    ``0..zones-1``."""
    from sklearn.cluster import KMeans

    return KMeans(n_clusters=zones, n_init=10, random_state=seed).fit_predict(positions).astype(np.int64)


def sensor_zones(
    nodes: int = 64,
    zones: int = 4,
    classes: int = 3,
    samples: int = 400,
    snapshots: int = 4,
    noise: float = 0.3,
    process_order: int = 6,
    neighbors: int = 6,
    seed: int = 0,
    val_fraction: float = 0.2,
    test_fraction: float = 0.2,
) -> Dataset:
    """A regime in every zone: the network is split into ``zones`` zones (k-means of the
    positions); in each recording every zone runs its own regime (one of ``classes``, as in the
    whole-network scenario), so a sensor's reading is ``standardize(H_c(S) w)`` at that sensor,
    ``c`` its zone's regime. ``snapshots`` independent snapshots a recording are the features.

    Returns:
        A dataset with signals ``(samples, nodes, snapshots)`` and labels ``(samples, nodes)``:
        each sensor's regime.
    """
    rng = np.random.default_rng(seed)
    positions = rng.random((nodes, 2))
    graph = replace(knn_graph(positions, neighbors), name="sensor_network")
    shift = normalized_adjacency(graph)
    zone = zone_of_each_node(positions, zones, seed)
    regimes = rng.integers(classes, size=(samples, zones))
    labels = regimes[:, zone]  # (samples, nodes)
    white = rng.standard_normal((nodes, samples * snapshots))
    filtered = np.stack([apply_polynomial(shift, response, white) for response in regime_responses(classes, process_order)])
    filtered = filtered.reshape(classes, nodes, samples, snapshots).transpose(2, 1, 3, 0)  # (samples, nodes, snapshots, classes)
    readings = np.take_along_axis(filtered, labels[:, :, None, None], axis=3)[..., 0]  # (samples, nodes, snapshots)
    readings -= readings.mean(axis=1, keepdims=True)
    readings /= readings.std(axis=1, keepdims=True) + 1e-12
    signals = readings + noise * rng.standard_normal(readings.shape)
    return Dataset(
        signals=signals.astype(np.float32), labels=labels, splits=random_splits(samples, val_fraction, test_fraction, seed),
        classes=classes, native_graph=graph, name="sensor_zones",
    )


@dataclass
class SensorZonesConfig(RandomSplitConfig):
    """A regime in every zone of the network (see :func:`sensor_zones`)."""

    source: str = "sensor_zones"
    nodes: int = declared(at_least(2), 64)
    zones: int = declared(at_least(1), 4)
    classes: int = declared(at_least(2), 3)
    samples: int = declared(at_least(10), 400)
    snapshots: int = declared(at_least(1), 4)
    noise: float = declared(at_least(0, "a number"), 0.3)
    process_order: int = declared(at_least(0), 6)
    neighbors: int = 6

    def check(self) -> None:
        super().check()
        require("neighbors", self.neighbors, 1 <= self.neighbors < self.nodes, f"an integer in 1..{self.nodes - 1}")
        require("zones", self.zones, self.zones <= self.nodes, f"an integer in 1..{self.nodes} (at most one a node)")

    def known_nodes(self) -> int | None:
        return self.nodes

    def known_samples(self) -> int | None:
        return self.samples


DATASETS.add(DatasetSource(
    "sensor_zones", SensorZonesConfig, keyword_loader(sensor_zones), "demo: regimes by zone", tasks=("node_classification",),
))
