"""Shared helpers: composing the app's config in-process, as the command line would."""

from pathlib import Path

import pytest
from hydra import compose, initialize_config_dir
from omegaconf import DictConfig, OmegaConf

CONFIG_DIR = Path(__file__).resolve().parents[1] / "configs"

# A demo scenario small enough that a job trains in about a second.
SMALL = ["data.samples_per_class=40", "data.nodes=24", "train.epochs=8", "train.patience=4"]


def composed(overrides: list[str]) -> DictConfig:
    """The job config (without the ``hydra`` node) that ``shiftbench OVERRIDES`` would run."""
    with initialize_config_dir(str(CONFIG_DIR), version_base="1.3"):
        config = compose("config", overrides=overrides)
    OmegaConf.set_struct(config, False)
    return config


@pytest.fixture
def small_config():
    return lambda *overrides: composed([*SMALL, *overrides])


@pytest.fixture(autouse=True)
def fresh_cache():
    """Each test builds its own datasets and graphs (the process-wide cache starts empty)."""
    from shiftbench import cache

    cache.clear()
    yield
    cache.clear()
