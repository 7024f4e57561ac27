"""Demo scenarios with a value to predict on every node: the sensor network of the pipe story,
its readings evolving by a diffusion over the pipes.

Sensors sit at random positions in the unit square, each linked to its nearest neighbours (the
native graph, as in ``sensor_regimes``). Readings follow

    x_{t+1} = H(S) x_t + noise * w_t,      H(S) = decay * ((1 - mixing) I + mixing S)^hops,

with ``w_t`` white Gaussian and ``S`` the network's normalized adjacency (eigenvalues in
[-1, 1], so ``|h(lambda)| <= decay < 1`` and the process is stable). Each sample is an
independent run, started from rest and run ``burn_in`` steps, so no two samples share readings.

- ``sensor_forecast``: the features are the last ``window`` snapshots, the target the next one.
- ``sensor_reconstruction``: one snapshot with a share ``masked`` of its sensors failed (their
  reading set to 0); the features are the readings and an indicator of a working sensor, the
  targets the failed sensors' true readings (the working ones are not scored).
- ``sensor_leak``, ``sensor_leak_size``: a leak starts at one node and spreads by ``((1 - mixing) I + mixing S)`` a
  step; the sensors see ``window`` snapshots of it, from a random ``1..delay`` steps after it
  started, over the process's own readings as background; the target is the source node (or,
  with sizes drawn at random, the leak's size: the volume it lost).

Readings are divided by their standard deviation over all runs, so figures read in units of it.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from shiftbench.config import FRACTION, at_least, declared, require
from shiftbench.data.dataset import Dataset, keyword_loader
from shiftbench.data.splits import RandomSplitConfig, random_splits
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import normalized_adjacency
from shiftbench.graphs.standard import knn_graph
from shiftbench.registry import DATASETS, DatasetSource


def sensor_network(nodes: int, neighbors: int, rng: np.random.Generator) -> Graph:
    """Sensors at uniform random positions in the unit square, each linked to its
    ``neighbors`` nearest (symmetrized)."""
    return replace(knn_graph(rng.random((nodes, 2)), neighbors), name="sensor_network")


def diffusion(shift: sp.spmatrix, readings: np.ndarray, decay: float, mixing: float, hops: int) -> np.ndarray:
    """``H(S) X = decay * ((1 - mixing) I + mixing S)^hops X``.

    Shapes: shift ``(nodes, nodes)``, readings ``(nodes, runs)`` -> ``(nodes, runs)``."""
    for _ in range(hops):
        readings = (1.0 - mixing) * readings + mixing * (shift @ readings)
    return decay * readings


def simulate(
    graph: Graph, runs: int, steps: int, burn_in: int, decay: float, mixing: float, hops: int, noise: float,
    rng: np.random.Generator,
) -> np.ndarray:
    """``runs`` independent runs of the process, each from rest through ``burn_in`` steps, then
    ``steps`` snapshots kept. Returns ``(runs, steps, nodes)`` float64."""
    shift = normalized_adjacency(graph)
    readings = np.zeros((graph.nodes, runs))
    kept = []
    for step in range(burn_in + steps):
        readings = diffusion(shift, readings, decay, mixing, hops) + noise * rng.standard_normal(readings.shape)
        if step >= burn_in:
            kept.append(readings.T.copy())
    return np.stack(kept, axis=1)


def sensor_forecast(
    nodes: int = 64, samples: int = 600, window: int = 3, decay: float = 0.98, mixing: float = 0.9, hops: int = 1,
    noise: float = 0.3, burn_in: int = 30, neighbors: int = 6, seed: int = 0, val_fraction: float = 0.2,
    test_fraction: float = 0.2,
) -> Dataset:
    """One-step forecasting: signals ``(samples, nodes, window)`` (snapshot ``t - window + 1``
    first), targets ``(samples, nodes, 1)`` (snapshot ``t + 1``)."""
    rng = np.random.default_rng(seed)
    graph = sensor_network(nodes, neighbors, rng)
    runs = simulate(graph, samples, window + 1, burn_in, decay, mixing, hops, noise, rng)
    runs /= runs.std()
    signals = runs[:, :window].transpose(0, 2, 1)  # (samples, window, nodes) -> (samples, nodes, window)
    targets = runs[:, window][:, :, None]
    return Dataset(
        signals=np.ascontiguousarray(signals, dtype=np.float32), labels=targets.astype(np.float32),
        splits=random_splits(samples, val_fraction, test_fraction, seed), classes=1, native_graph=graph,
        name="sensor_forecast",
    )


def sensor_reconstruction(
    nodes: int = 64, samples: int = 600, masked: float = 0.3, decay: float = 0.98, mixing: float = 0.9, hops: int = 1,
    noise: float = 0.3, burn_in: int = 30, neighbors: int = 6, seed: int = 0, val_fraction: float = 0.2,
    test_fraction: float = 0.2,
) -> Dataset:
    """Reconstructing failed sensors: signals ``(samples, nodes, 2)`` (the reading, 0 where the
    sensor failed; 1 where it works, else 0), targets ``(samples, nodes, 1)`` holding the true
    reading of each failed sensor and NaN at working ones. At least one sensor fails per sample
    and at least one works."""
    rng = np.random.default_rng(seed)
    graph = sensor_network(nodes, neighbors, rng)
    snapshots = simulate(graph, samples, 1, burn_in, decay, mixing, hops, noise, rng)[:, 0]
    snapshots /= snapshots.std()
    failed = rng.random((samples, nodes)) < masked
    failed[np.arange(samples), rng.integers(nodes, size=samples)] = True
    working = ~failed
    working[np.arange(samples), rng.integers(nodes, size=samples)] = True
    failed = ~working
    signals = np.stack([np.where(working, snapshots, 0.0), working.astype(np.float64)], axis=2)
    targets = np.where(failed, snapshots, np.nan)[:, :, None]
    return Dataset(
        signals=signals.astype(np.float32), labels=targets.astype(np.float32),
        splits=random_splits(samples, val_fraction, test_fraction, seed), classes=1, native_graph=graph,
        name="sensor_reconstruction",
    )


def leak_spread(shift: sp.spmatrix, sources: np.ndarray, sizes: np.ndarray, starts: np.ndarray, window: int,
                mixing: float) -> np.ndarray:
    """``window`` snapshots of leaks of ``sizes`` started at ``sources``, seen from ``starts``
    steps after they began: ``sizes * D^t e_s`` with ``D = (1 - mixing) I + mixing S``.

    Shapes: sources, sizes, starts ``(samples,)`` -> ``(samples, window, nodes)``."""
    samples = len(sources)
    spread = np.zeros((shift.shape[0], samples))
    spread[sources, np.arange(samples)] = sizes
    snapshots = []
    for _ in range(int(starts.max()) + window - 1):
        spread = (1.0 - mixing) * spread + mixing * (shift @ spread)
        snapshots.append(spread.T.copy())
    seen = np.stack(snapshots, axis=1)  # (samples, steps, nodes)
    return seen[np.arange(samples)[:, None], starts[:, None] - 1 + np.arange(window)]


def leaks(
    nodes: int, samples: int, window: int, delay: int, amplitude: float, decay: float, mixing: float, hops: int,
    noise: float, burn_in: int, neighbors: int, seed: int, sized: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, Graph]:
    """Leaks over the network's own readings: ``(signals (samples, nodes, window), sources
    (samples,), sizes (samples,), graph)``; every leak has size ``amplitude``, or with ``sized``
    a size drawn uniformly from ``[0, amplitude]``."""
    rng = np.random.default_rng(seed)
    graph = sensor_network(nodes, neighbors, rng)
    background = simulate(graph, samples, window, burn_in, decay, mixing, hops, noise, rng)
    background /= background.std()
    sources = rng.integers(nodes, size=samples)
    starts = rng.integers(1, delay + 1, size=samples)
    sizes = rng.uniform(0.0, amplitude, size=samples) if sized else np.full(samples, amplitude)
    seen = leak_spread(normalized_adjacency(graph), sources, sizes, starts, window, mixing)
    signals = (seen + background).transpose(0, 2, 1)  # (samples, window, nodes) -> (samples, nodes, window)
    return signals.astype(np.float32), sources, sizes, graph


def sensor_leak(
    nodes: int = 64, samples: int = 600, window: int = 2, delay: int = 3, amplitude: float = 10.0, decay: float = 0.98,
    mixing: float = 0.5, hops: int = 1, noise: float = 0.3, burn_in: int = 30, neighbors: int = 6, seed: int = 0,
    val_fraction: float = 0.2, test_fraction: float = 0.2,
) -> Dataset:
    """Locating a leak: signals ``(samples, nodes, window)``, the leak's spread ``amplitude *
    D^t e_s`` (``t`` from a random start in ``1..delay``) on top of the process's standardized
    readings; labels ``(samples,)`` the source node ``s``."""
    signals, sources, _, graph = leaks(
        nodes, samples, window, delay, amplitude, decay, mixing, hops, noise, burn_in, neighbors, seed, sized=False
    )
    return Dataset(
        signals=signals, labels=sources.astype(np.int64), splits=random_splits(samples, val_fraction, test_fraction, seed),
        classes=1, native_graph=graph, name="sensor_leak",
    )


def sensor_leak_size(
    nodes: int = 64, samples: int = 600, window: int = 2, delay: int = 3, amplitude: float = 30.0, decay: float = 0.98,
    mixing: float = 0.5, hops: int = 1, noise: float = 0.3, burn_in: int = 30, neighbors: int = 6, seed: int = 0,
    val_fraction: float = 0.2, test_fraction: float = 0.2,
) -> Dataset:
    """The volume a leak lost: as ``sensor_leak``, with each leak's size drawn from
    ``[0, amplitude]``; targets ``(samples, 1)`` the size."""
    signals, _, sizes, graph = leaks(
        nodes, samples, window, delay, amplitude, decay, mixing, hops, noise, burn_in, neighbors, seed, sized=True
    )
    return Dataset(
        signals=signals, labels=sizes.astype(np.float32)[:, None],
        splits=random_splits(samples, val_fraction, test_fraction, seed), classes=1, native_graph=graph,
        name="sensor_leak_size",
    )


@dataclass
class SensorDynamicsConfig(RandomSplitConfig):
    """The network and the process both scenarios share (see the module's description)."""

    nodes: int = declared(at_least(2), 64)
    samples: int = declared(at_least(10), 600)
    decay: float = declared(FRACTION, 0.98)
    mixing: float = declared(FRACTION, 0.9)
    hops: int = declared(at_least(1), 1)
    noise: float = declared(at_least(0, "a number"), 0.3)
    burn_in: int = declared(at_least(1), 30)
    neighbors: int = 6

    def check(self) -> None:
        super().check()
        require("neighbors", self.neighbors, 1 <= self.neighbors < self.nodes, f"an integer in 1..{self.nodes - 1}")

    def known_nodes(self) -> int | None:
        return self.nodes

    def known_samples(self) -> int | None:
        return self.samples


@dataclass
class SensorForecastConfig(SensorDynamicsConfig):
    """Forecast the next snapshot from the last ``window``."""

    source: str = "sensor_forecast"
    window: int = declared(at_least(1), 3)


@dataclass
class SensorReconstructionConfig(SensorDynamicsConfig):
    """Reconstruct the readings of a share ``masked`` of failed sensors from the rest."""

    source: str = "sensor_reconstruction"
    masked: float = declared(FRACTION, 0.3)


@dataclass
class SensorLeakConfig(SensorDynamicsConfig):
    """Locate the node where a leak started from ``window`` snapshots of its spread."""

    source: str = "sensor_leak"
    mixing: float = declared(FRACTION, 0.5)
    window: int = declared(at_least(1), 2)
    delay: int = declared(at_least(1), 3)
    amplitude: float = declared(at_least(0, "a number"), 10.0)


@dataclass
class SensorLeakSizeConfig(SensorLeakConfig):
    """Estimate a leak's size (the volume it lost), drawn from ``[0, amplitude]``, from
    ``window`` snapshots of its spread."""

    source: str = "sensor_leak_size"
    amplitude: float = declared(at_least(0, "a number"), 30.0)


DATASETS.add(DatasetSource(
    "sensor_leak", SensorLeakConfig, keyword_loader(sensor_leak), "demo: leak source", tasks=("source_localization",),
))
DATASETS.add(DatasetSource(
    "sensor_leak_size", SensorLeakSizeConfig, keyword_loader(sensor_leak_size),
    "demo: leak size", tasks=("regression",),
))
DATASETS.add(DatasetSource(
    "sensor_forecast", SensorForecastConfig, keyword_loader(sensor_forecast), "demo: sensor forecast",
    tasks=("node_regression",),
))
DATASETS.add(DatasetSource(
    "sensor_reconstruction", SensorReconstructionConfig, keyword_loader(sensor_reconstruction),
    "demo: failed sensors", tasks=("node_regression",),
))
