"""Datasets: the demo scenario and the splits."""

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.sensor_regimes import sensor_regimes

__all__ = ["Dataset", "Splits", "load_dataset", "sensor_regimes"]


def load_dataset(config) -> Dataset:
    """The dataset a validated data config names."""
    if config.name == "sensor_regimes":
        return sensor_regimes(
            nodes=config.nodes,
            classes=config.classes,
            samples_per_class=config.samples_per_class,
            noise=config.noise,
            process_order=config.process_order,
            neighbors=config.neighbors,
            seed=config.seed,
            val_fraction=config.val_fraction,
            test_fraction=config.test_fraction,
        )
    raise ValueError(f"unknown dataset {config.name!r}")
