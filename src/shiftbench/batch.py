"""Batches of jobs through the launcher a sweep would use: Hydra's launcher plugins (``basic``
in this process, ``joblib`` on local cores, ``submitit_local``, ``submitit_slurm`` and the
``slurm_cpu`` preset on a cluster), chosen by the same ``hydra/launcher=...`` and
``hydra.launcher.*`` overrides. The decision study hands its trials and units to one of these,
a batch at a time; every job is an ordinary job through the store, whose claims are the only
guard against two workers training one config."""

from __future__ import annotations

import logging
import multiprocessing
import os
import shutil
import signal
import time
from pathlib import Path
from collections.abc import Callable
from typing import Any

from omegaconf import DictConfig

from shiftbench.errors import ConfigError

# How long to wait before asking again for a job another process is training, and between two
# lines saying so.
CLAIM_POLL_SECONDS = 2.0
WAITING_LINE_SECONDS = 60.0


def is_launcher_override(argument: str) -> bool:
    """Whether a command-line override chooses or sets the launcher rather than the jobs."""
    return argument.lstrip("+~").startswith(("hydra/launcher=", "hydra.launcher."))


def launched_job(config: DictConfig) -> dict[str, Any]:
    """One job of a batch, as a launcher runs it (in this process, a worker or a cluster task):
    the job's record. ``config`` is the job's composed config; its launch folder is the batch's
    ``hydra.sweep.dir``."""
    from hydra.core.hydra_config import HydraConfig
    from omegaconf import OmegaConf

    from shiftbench.job import run_job
    from shiftbench.runtime import keep_freed_memory

    keep_freed_memory()
    if multiprocessing.parent_process() is not None:
        # A worker of a parallel launcher: Ctrl-C reaches the whole process group, and the study
        # that started the worker answers it (one line, status 130), not each worker's traceback.
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    hydra = HydraConfig.get()
    overrides = list(OmegaConf.to_container(hydra.overrides.task))  # type: ignore[arg-type]
    return run_job(config, Path(hydra.sweep.dir), overrides, live=False, quiet=True)


class BatchRunner:
    """Runs batches of jobs (each a list of overrides) through the chosen launcher and returns
    their records in order; a job whose launch failed comes back as a failed record.

    Must be made inside Hydra's ``initialize_config_dir`` (it reads the config loader)."""

    def __init__(self, launcher_overrides: list[str], folder: Path, say: Callable[[str], None] = print) -> None:
        from hydra._internal.callbacks import Callbacks
        from hydra.core.global_hydra import GlobalHydra
        from hydra.core.plugins import Plugins
        from hydra.errors import HydraException
        from hydra.types import HydraContext, RunMode

        if any(a.lstrip("+").startswith("hydra/launcher=slurm_cpu") for a in launcher_overrides) and shutil.which("srun") is None:
            raise ConfigError("hydra/launcher=slurm_cpu: no SLURM on this machine (srun not found); run with "
                              "hydra/launcher=joblib here, or on a cluster's login node")
        folder.mkdir(parents=True, exist_ok=True)
        loader = GlobalHydra.instance().config_loader()
        try:
            config = loader.load_configuration("config", overrides=[*launcher_overrides, f"hydra.sweep.dir={folder}"],
                                               run_mode=RunMode.MULTIRUN)
            # The study prints its own progress: no sweep callbacks.
            context = HydraContext(config_loader=loader, callbacks=Callbacks())
            self.launcher = Plugins.instance().instantiate_launcher(hydra_context=context, task_function=launched_job, config=config)
        except (HydraException, ImportError) as error:
            raise ConfigError(f"{' '.join(launcher_overrides)}: {str(error).splitlines()[0]}") from None
        self.name = config.hydra.launcher._target_.rsplit(".", 1)[-1]
        if self.name == "JoblibLauncher":
            # After Ctrl-C, joblib's resource tracker (a process of its own, started with this
            # environment) removes the workers' shared-memory folders and warns that it did; the
            # study's one line says what happened.
            filters = os.environ.get("PYTHONWARNINGS", "")
            os.environ["PYTHONWARNINGS"] = ",".join(filter(None, [filters, "ignore:resource_tracker:UserWarning"]))
        self.workers = launcher_workers(self.name, config.hydra.launcher)
        self.jobs = 0
        self.say = say

    def __call__(self, batch: list[list[str]]) -> list[dict[str, Any]]:
        """The records of ``batch``'s jobs, in order. A job another process has claimed is
        asked for again every few seconds until that process's record is there (or its claim
        went stale and this one trained it), so two studies on one results_dir share the work."""
        records = self.launch(batch)
        told = 0.0
        while waiting := [index for index, record in enumerate(records) if record.get("status") == "claimed"]:
            if time.monotonic() - told >= WAITING_LINE_SECONDS:
                holders = sorted({str(records[index].get("holder")) for index in waiting})
                self.say(f"waiting for {len(waiting)} job{'s' * (len(waiting) > 1)} another process is training "
                         f"({'; '.join(holders)}); their records will be used")
                told = time.monotonic()
            time.sleep(CLAIM_POLL_SECONDS)
            for index, record in zip(waiting, self.launch([batch[index] for index in waiting])):
                records[index] = record
        return records

    def launch(self, batch: list[list[str]]) -> list[dict[str, Any]]:
        """One pass of ``batch`` through the launcher. submitit's local executor starts every job
        it is given at once, each a process of its own: it gets the batch a core's worth of jobs
        at a time, so a batch of ninety units does not start ninety processes on two cores."""
        if self.name == "LocalLauncher" and len(batch) > self.workers:
            return [record for first in range(0, len(batch), self.workers)
                    for record in self.launch(batch[first:first + self.workers])]
        if not batch:
            return []
        # The launchers log every job's overrides; the study prints its own progress.
        quiet = [logging.getLogger(name) for name in ("hydra", "hydra_plugins")]
        levels = [logger.level for logger in quiet]
        for logger in quiet:
            logger.setLevel(logging.WARNING)
        try:
            returns = self.launcher.launch(batch, initial_job_idx=self.jobs)
        finally:
            for logger, level in zip(quiet, levels):
                logger.setLevel(level)
        self.jobs += len(batch)
        records = []
        for overrides, returned in zip(batch, returns):
            try:
                records.append(returned.return_value)
            except Exception as error:  # the launch itself failed; the job's config stays untrained
                records.append({"status": "failed", "error": f"{type(error).__name__}: {error}", "overrides": overrides})
        return records


def launcher_workers(name: str, launcher: DictConfig) -> int:
    """How many jobs a launcher runs at once: joblib's ``n_jobs`` (negative counts back from the
    cores, as joblib does), one per core for submitit's local executor (see
    :meth:`BatchRunner.launch`), SLURM's ``array_parallelism``, else one."""
    from shiftbench.runtime import available_cores

    if name == "JoblibLauncher":
        asked = int(launcher.get("n_jobs") or 1)
        return asked if asked > 0 else max(1, available_cores() + 1 + asked)
    if name == "LocalLauncher":
        return available_cores()
    if name == "SlurmLauncher":
        return int(launcher.get("array_parallelism") or 1)
    return 1
