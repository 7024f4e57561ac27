"""Datasets: the demo scenario, digits, UCR series, the user's files, and the splits."""

from dataclasses import asdict

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.digits import digits
from shiftbench.data.files import load_signal_file
from shiftbench.data.sensor_regimes import sensor_regimes
from shiftbench.data.ucr import ucr

__all__ = ["Dataset", "Splits", "digits", "load_dataset", "load_signal_file", "sensor_regimes", "ucr"]


def load_dataset(config) -> Dataset:
    """The dataset a validated data config names; the config's other keys are its arguments."""
    loaders = {"sensor_regimes": sensor_regimes, "digits": digits, "ucr": ucr, "file": load_signal_file}
    arguments = {key: value for key, value in asdict(config).items() if key != "source"}
    return loaders[config.source](**arguments)
