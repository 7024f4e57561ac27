"""Sweep progress: one line per finished job, and the tally at the end of a sweep.

A Hydra callback (registered in ``configs/config.yaml``); it sees the jobs that run in its own
process, which is every job under the basic launcher.
"""

from __future__ import annotations

import time
from typing import Any

from hydra.experimental.callback import Callback
from omegaconf import DictConfig, OmegaConf

from shiftbench.preflight import count_jobs


def format_seconds(seconds: float) -> str:
    minutes, rest = divmod(int(round(seconds)), 60)
    return f"{minutes}m{rest:02d}s" if minutes else f"{rest}s"


class SweepProgress(Callback):
    """Prints ``[k/n] family data: test accuracy, elapsed, left`` as each job ends."""

    def __init__(self) -> None:
        self.total = 0
        self.started = 0.0
        self.finished = 0
        self.tally = {"completed": 0, "skipped": 0, "failed": 0}

    def on_multirun_start(self, config: DictConfig, **kwargs: Any) -> None:
        task = list(OmegaConf.to_container(config.hydra.overrides.task))  # type: ignore[arg-type]
        study = config.hydra.sweeper.get("params")
        params = OmegaConf.to_container(study) if study else {}
        self.total = count_jobs(task, params)  # type: ignore[arg-type]
        self.started = time.perf_counter()

    def on_job_end(self, config: DictConfig, job_return: Any, **kwargs: Any) -> None:
        if self.total == 0:  # a single run, not a sweep
            return
        self.finished += 1
        outcome = job_return.return_value if isinstance(job_return.return_value, dict) else {}
        status = "skipped" if outcome.get("skipped") else outcome.get("status", "failed")
        self.tally[status if status in self.tally else "failed"] += 1
        elapsed = time.perf_counter() - self.started
        left = elapsed / self.finished * (self.total - self.finished)
        accuracy = outcome.get("test_accuracy")
        result = f"test accuracy {accuracy:.3f}" if accuracy is not None else status
        print(
            f"[{self.finished}/{self.total}] {outcome.get('family', '?')} on {outcome.get('data', '?')}: "
            f"{result} ({status}), elapsed {format_seconds(elapsed)}, left ~{format_seconds(left)}",
            flush=True,
        )

    def on_multirun_end(self, config: DictConfig, **kwargs: Any) -> None:
        tally = self.tally
        print(
            f"sweep done: {tally['completed']} completed, {tally['skipped']} skipped, {tally['failed']} failed "
            f"in {format_seconds(time.perf_counter() - self.started)}",
            flush=True,
        )
