"""Datasets: the demo scenario and the splits."""

from dataclasses import asdict

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.sensor_regimes import sensor_regimes

__all__ = ["Dataset", "Splits", "load_dataset", "sensor_regimes"]


def load_dataset(config) -> Dataset:
    """The dataset a validated data config names; the config's other keys are its arguments."""
    arguments = {key: value for key, value in asdict(config).items() if key != "name"}
    if config.name == "sensor_regimes":
        return sensor_regimes(**arguments)
    raise ValueError(f"unknown dataset {config.name!r}")
