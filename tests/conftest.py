"""Shared helpers: composing the app's config in-process, as the command line would."""

import os
from pathlib import Path

import pytest
from hydra import compose, initialize_config_dir
from omegaconf import DictConfig, OmegaConf

CONFIG_DIR = Path(__file__).resolve().parents[1] / "configs"

def pytest_configure(config):
    """Under pytest-xdist, pin each worker (and the subprocesses it starts) to one core, taken in
    turn: torch then runs one thread a worker instead of several that spin against each other
    (measured on 2 cores: the suite's CPU time fell from 12 to 7 minutes). Workers beyond the
    core count overlap one test's waiting on its subprocesses with another's computing."""
    worker = os.environ.get("PYTEST_XDIST_WORKER")
    if worker and hasattr(os, "sched_setaffinity"):
        import torch

        cores = sorted(os.sched_getaffinity(0))
        os.sched_setaffinity(0, {cores[int(worker.removeprefix("gw")) % len(cores)]})
        torch.set_num_threads(1)


# Files whose tests start real processes or train to published figures: run first, so that the
# workers' tails are short tests (the suite is balanced across pytest-xdist workers).
SLOW_FIRST = ("test_cli.py", "test_ucr.py", "test_study.py", "test_memory.py", "test_claims.py")


def pytest_collection_modifyitems(config, items):
    items.sort(key=lambda item: item.path.name not in SLOW_FIRST)


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
