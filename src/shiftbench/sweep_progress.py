"""Sweep progress: one line per finished job, and the tally at the end of a sweep.

A Hydra callback (registered in ``configs/config.yaml``). Jobs may finish in other processes
(joblib workers, submitit jobs), so progress lives in a small append-only file in the sweep
folder, one for each sweep command (``.progress.<token>.jsonl``, removed when the sweep ends): its
first line holds the job count and start time, and each finished job appends one line. Appends
of one short line are atomic, so parallel jobs never garble each other's.
"""

from __future__ import annotations

import json
import os
import socket
import sys
import time
from pathlib import Path
from typing import Any

from hydra.core.hydra_config import HydraConfig
from hydra.experimental.callback import Callback
from omegaconf import DictConfig, OmegaConf

from shiftbench.runtime import process_alive
from shiftbench.sweep_axes import count_jobs

PROGRESS_FILE = ".progress.{token}.jsonl"
SWEEP_TOKEN = "SHIFTBENCH_SWEEP_TOKEN"


def format_seconds(seconds: float) -> str:
    minutes, rest = divmod(int(round(seconds)), 60)
    return f"{minutes}m{rest:02d}s" if minutes else f"{rest}s"


def append_line(path: Path, entry: dict[str, Any]) -> None:
    descriptor = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(descriptor, (json.dumps(entry) + "\n").encode())
    finally:
        os.close(descriptor)


def read_progress(path: Path) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """The sweep's header (``total``, ``started``) and the finished jobs' entries. A line cut
    short by a killed process is passed over."""
    lines = []
    for line in path.read_text(encoding="utf-8", errors="replace").splitlines():
        try:
            lines.append(json.loads(line))
        except ValueError:
            continue
    return lines[0], lines[1:]


def say(line: str) -> None:
    """Print ``line`` in one write: parallel jobs share the terminal, and an unbuffered
    ``print`` writes the text and its newline apart, so another process's line could land
    between them."""
    sys.stdout.write(line + "\n")
    sys.stdout.flush()


def job_line(header: dict[str, Any], finished: list[dict[str, Any]], now: float) -> str:
    """``[k/n] family on data: test <metric> (status), elapsed, left`` for the latest job, as
    of the time it finished (``now`` for an entry that does not say)."""
    latest, count = finished[-1], len(finished)
    elapsed = latest.get("finished_at", now) - header["started"]
    left = elapsed / count * max(header["total"] - count, 0)
    metric, figure = latest.get("metric", "accuracy"), latest.get("test_score")
    result = f"test {metric} {figure:.3f}" if figure is not None else latest["status"]
    return (
        f"[{count}/{header['total']}] {latest.get('family')} on {latest.get('data')}: {result} "
        f"({latest['status']}), elapsed {format_seconds(elapsed)}, left ~{format_seconds(left)}"
    )


def tally_line(header: dict[str, Any], finished: list[dict[str, Any]], now: float) -> str:
    counts = {status: sum(entry["status"] == status for entry in finished) for status in ("completed", "skipped", "failed")}
    return (
        f"sweep done: {counts['completed']} completed, {counts['skipped']} skipped, {counts['failed']} failed "
        f"in {format_seconds(now - header['started'])}"
    )


def new_token() -> str:
    """A sweep process's name for its progress file: ``<host>-<pid>-<ns>``."""
    return f"{socket.gethostname()}-{os.getpid()}-{time.time_ns()}"


def remove_dead_progress(folder: Path) -> None:
    """Remove the progress files that sweeps on this host left when they were killed (their
    process is gone); other hosts' files are theirs to clean."""
    host = socket.gethostname()
    for path in folder.glob(PROGRESS_FILE.format(token="*")):
        token = path.name.removeprefix(".progress.").removesuffix(".jsonl")
        owner, _, pid = token.rpartition("-")[0].rpartition("-")
        if owner == host and pid.isdigit() and not process_alive(int(pid)):
            path.unlink(missing_ok=True)


class SweepProgress(Callback):
    """Prints a progress line as each job of a sweep ends, and the tally when the sweep ends."""

    @staticmethod
    def _path(config: DictConfig) -> Path:
        # One file a sweep process, so two sweeps writing into one folder keep their own counts;
        # the launcher's workers (threads, loky or submitit processes) inherit the name.
        token = os.environ.setdefault(SWEEP_TOKEN, new_token())
        return Path(config.hydra.sweep.dir).resolve() / PROGRESS_FILE.format(token=token)

    def on_multirun_start(self, config: DictConfig, **kwargs: Any) -> None:
        os.environ[SWEEP_TOKEN] = new_token()
        remove_dead_progress(Path(config.hydra.sweep.dir).resolve())
        task = list(OmegaConf.to_container(config.hydra.overrides.task))  # type: ignore[arg-type]
        study = config.hydra.sweeper.get("params")
        params = OmegaConf.to_container(study) if study else {}
        path = self._path(config)
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps({"total": count_jobs(task, params), "started": time.time()}) + "\n")  # type: ignore[arg-type]

    def on_job_end(self, config: DictConfig, job_return: Any, **kwargs: Any) -> None:
        if HydraConfig.get().mode.name != "MULTIRUN":
            return
        outcome = job_return.return_value if isinstance(job_return.return_value, dict) else {}
        status = "skipped" if outcome.get("skipped") else outcome.get("status") or "failed"
        path = self._path(config)
        append_line(path, {**outcome, "status": status, "finished_at": time.time()})
        header, finished = read_progress(path)
        if "total" in header:  # a worker that did not inherit the sweep's file has no header
            say(job_line(header, finished, time.time()))

    def on_multirun_end(self, config: DictConfig, **kwargs: Any) -> None:
        path = self._path(config)
        if not path.is_file():
            return
        header, finished = read_progress(path)
        if "submitit" in str(config.hydra.launcher.get("_target_", "")):
            # submitit jobs print into their own log files: their lines are shown here, in order.
            for count in range(1, len(finished) + 1):
                say(job_line(header, finished[:count], time.time()))
        say(tally_line(header, finished, time.time()))
        path.unlink(missing_ok=True)
