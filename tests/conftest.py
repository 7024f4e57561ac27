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
    from shiftbench.config_store import register_defaults

    register_defaults()
    with initialize_config_dir(str(CONFIG_DIR), version_base="1.3"):
        config = compose("config", overrides=overrides)
    OmegaConf.set_struct(config, False)
    return config


@pytest.fixture
def small_config(tmp_path):
    """A small job's config whose store is ``tmp_path`` (a later ``results_dir=`` wins)."""
    return lambda *overrides: composed([*SMALL, f"results_dir={tmp_path}", *overrides])


def home(record: dict) -> Path:
    """The folder in the store where ``record`` lives."""
    return Path(record["config"]["results_dir"]) / "store" / record["config_hash"]


@pytest.fixture(autouse=True)
def fresh_cache():
    """Each test builds its own datasets and graphs (the process-wide cache starts empty)."""
    from shiftbench import cache

    cache.clear()
    yield
    cache.clear()


def home_of_config(config: DictConfig) -> Path:
    """The folder in the store where the job of ``config`` lives."""
    from shiftbench.config import as_plain_dict, validate
    from shiftbench.records import config_hash

    run = validate(config)
    return Path(run.results_dir) / "store" / config_hash(as_plain_dict(run))
