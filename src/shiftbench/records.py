"""Records: the JSON each job writes (:class:`Record`), written atomically, and loaded back as a
DataFrame, from the store, from a launch folder's pointers, or from folders of the old layout."""

from __future__ import annotations

import hashlib
import io
import json
import os
import platform
import subprocess
import tempfile
import warnings
from collections.abc import Callable, Iterable
from dataclasses import asdict, dataclass, field, fields
from pathlib import Path
from typing import Any, BinaryIO, TYPE_CHECKING

import numpy as np
import torch

import shiftbench

if TYPE_CHECKING:
    import pandas as pd

# Version 2: the record file is record.json in the store; configs carry split and task.
SCHEMA_VERSION = 2
RECORD_FILE = "record.json"
# What version 1 records (written before the store) are called; read, never written.
OLD_RECORD_FILE = "result.json"
READABLE_VERSIONS = (1, 2)
CURVE_FILE = "curve.csv"
# Each finished run's test predictions (sample, label, predicted) and a network's final weights
# (numpy arrays by state_dict key: numpy.load(..., allow_pickle=False) reads them, no pickle).
PREDICTIONS_FILE = "predictions.csv"
WEIGHTS_FILE = "weights.npz"
# A launch folder's list of the jobs it asked for: one JSON object a line, pointing at homes.
MANIFEST_FILE = "jobs.jsonl"
# Record fields that only some jobs have; the rest are in every record of this version.
OPTIONAL_FIELDS = (
    "folds",
    "graph_name", "graph_notes", "budget", "sized_widths", "chosen", "chance_accuracy", "balanced_accuracy", "macro_f1",
    "confusion_matrix", "train_rmse", "val_rmse", "test_rmse", "test_mae", "test_r2", "chance_rmse", "flags",
    "resumed_from_epoch", "failed_epoch", "traceback", "train_cpu_seconds", "per_class", "class_names",
)
# The splits whose primary-metric figure a record holds as ``<split>_<metric>``, and the chance
# level ``chance_<metric>``; load_records also gives them task-neutral columns ``<split>_score``.
SCORED = ("train", "val", "test", "chance")
# Keys of the config that say where output goes, whether to recompute, how many threads compute
# it (the record keeps the count), or how often to save progress, not what is computed.
OUTPUT_KEYS = ("results_dir", "force", "threads")
TRAIN_RUN_KEYS = ("checkpoint_every",)
# Root keys added after records were first written, with the value that computes what records
# without them computed: left out of the hash at that value, so earlier homes are still found.
LATER_KEYS = {"folds": 0}
# A job in one of these states is done: a rerun skips it.
FINAL_STATUSES = ("completed", "timed_out")


def _file_mode() -> int:
    """What ``open`` would give a new file under this process's umask (``0o666 & ~umask``)."""
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


FILE_MODE = _file_mode()


def write_atomic(path: Path, content: str | bytes | Callable[[BinaryIO], None]) -> Path:
    """Write ``content`` to ``path`` so that a reader sees the old file or the whole new one:
    write a temporary file in the same folder, flush it to disk, then rename it over ``path``.
    ``content`` is text (UTF-8), bytes, or a function that writes into the open binary file
    (so a large checkpoint streams to disk instead of being built in memory first)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        os.chmod(temporary, FILE_MODE)  # mkstemp makes it private; colleagues read results too
        with os.fdopen(handle, "wb") as stream:
            if callable(content):
                content(stream)
            else:
                stream.write(content.encode("utf-8") if isinstance(content, str) else content)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return path


@dataclass
class Record:
    """What a job writes to ``record.json``: its config, what it used, and what it measured.
    The task's primary metric is kept under its own name (``test_accuracy``, ``test_rmse``);
    figures a job did not reach (a failed job's) or that its task does not have stay None."""

    config: dict[str, Any]
    overrides: list[str]
    config_hash: str
    family: str
    graph: str
    operator: str
    data: str
    order: int | None
    seed: int
    split: int
    task: str
    started: str
    folds: int | None = None
    schema_version: int = SCHEMA_VERSION
    status: str = "failed"
    error: str | None = None
    nodes: int | None = None
    parameters: int | None = None
    train_accuracy: float | None = None
    val_accuracy: float | None = None
    test_accuracy: float | None = None
    test_loss: float | None = None
    best_epoch: int | None = None
    epochs_run: int | None = None
    train_seconds: float | None = None
    train_cpu_seconds: float | None = None
    samples_per_second: float | None = None
    inference_seconds_per_sample: float | None = None
    peak_rss_mb: float | None = None
    peak_rss_scope: str | None = None
    torch_threads: int | None = None
    versions: dict[str, str | None] = field(default_factory=dict)
    finished: str | None = None
    graph_name: str | None = None
    graph_notes: list[str] | None = None
    budget: int | None = None
    sized_widths: list[int] | None = None
    chosen: dict[str, Any] | None = None
    chance_accuracy: float | None = None
    balanced_accuracy: float | None = None
    macro_f1: float | None = None
    confusion_matrix: list[list[int]] | None = None
    per_class: dict[str, list[float]] | None = None
    class_names: list[str] | None = None
    flags: list[str] | None = None
    resumed_from_epoch: int | None = None
    failed_epoch: int | None = None
    train_rmse: float | None = None
    val_rmse: float | None = None
    test_rmse: float | None = None
    test_mae: float | None = None
    test_r2: float | None = None
    chance_rmse: float | None = None
    traceback: str | None = None

    def as_dict(self) -> dict[str, Any]:
        """The record as JSON-ready data; optional fields that are None are left out."""
        return {key: value for key, value in asdict(self).items() if key not in OPTIONAL_FIELDS or value is not None}


# The fields every record of this version carries.
REQUIRED_FIELDS = tuple(f.name for f in fields(Record) if f.name not in OPTIONAL_FIELDS)


def write_record(folder: Path, record: dict[str, Any]) -> Path:
    return write_atomic(folder / RECORD_FILE, json.dumps(record, indent=2, sort_keys=False) + "\n")


def write_curve(folder: Path, curve: list[dict[str, float]], metric: str = "accuracy") -> Path:
    """``curve.csv``: one row an epoch, the figures of the task's ``metric`` under its name."""
    import pandas as pd

    buffer = io.StringIO()
    columns = ["epoch", "train_loss", f"train_{metric}", "val_loss", f"val_{metric}", "seconds"]
    pd.DataFrame(curve, columns=columns).to_csv(buffer, index=False)
    return write_atomic(folder / CURVE_FILE, buffer.getvalue())


def write_predictions(folder: Path, predictions: pd.DataFrame) -> Path:
    buffer = io.StringIO()
    predictions.to_csv(buffer, index=False)
    return write_atomic(folder / PREDICTIONS_FILE, buffer.getvalue())


def write_weights(folder: Path, weights: dict[str, np.ndarray]) -> Path:
    return write_atomic(folder / WEIGHTS_FILE, lambda stream: np.savez(stream, **weights))


def computed_content(config: dict[str, Any]) -> dict[str, Any]:
    """What a job computes: its resolved config minus output locations and run settings."""
    content = {key: value for key, value in config.items() if key not in OUTPUT_KEYS}
    for key, neutral in LATER_KEYS.items():
        if content.get(key) == neutral:
            del content[key]
    if isinstance(content.get("train"), dict):
        content["train"] = {key: value for key, value in content["train"].items() if key not in TRAIN_RUN_KEYS}
    return content


def config_hash(config: dict[str, Any]) -> str:
    """A stable hash of :func:`computed_content`."""
    return hashlib.sha256(json.dumps(computed_content(config), sort_keys=True).encode()).hexdigest()[:16]


def versions() -> dict[str, str | None]:
    """Versions of python, torch and shiftbench, and the git commit of the source when known."""
    try:
        commit = subprocess.run(
            ["git", "rev-parse", "HEAD"],
            cwd=Path(shiftbench.__file__).parent,
            capture_output=True,
            text=True,
            timeout=5,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        commit = None
    return {
        "python": platform.python_version(),
        "torch": torch.__version__,
        "shiftbench": shiftbench.__version__,
        "git_commit": commit,
    }


def read_manifest(folder: Path) -> list[dict[str, Any]]:
    """The entries of a launch folder's manifest, oldest first; a line cut short (its writer was
    killed mid-line) is passed over."""
    path = folder / MANIFEST_FILE
    entries = []
    if path.is_file():
        for line in path.read_text(encoding="utf-8").splitlines():
            try:
                entry = json.loads(line)
            except ValueError:
                continue
            if isinstance(entry, dict) and "home" in entry:
                entries.append(entry)
    return entries


PathLike = str | os.PathLike


def as_paths(paths: PathLike | Iterable[PathLike]) -> list[Path]:
    """One path or several, each a ``str`` or ``Path``, as a list of ``Path``."""
    return [Path(paths)] if isinstance(paths, (str, os.PathLike)) else [Path(path) for path in paths]


def find_records(paths: PathLike | Iterable[PathLike]) -> list[Path]:
    """Every record file under ``paths`` (one or several, ``str`` or ``Path``): record files
    given themselves, the homes a launch folder's manifest points at, and every ``record.json``
    (or old ``result.json``) below a folder outside ``superseded`` folders; sorted, each once."""
    found: set[Path] = set()
    for path in as_paths(paths):
        if path.is_file():
            found.add(path.resolve())
            continue
        for entry in read_manifest(path):
            home = (path / entry["home"]).resolve()
            if (home / RECORD_FILE).is_file():
                found.add(home / RECORD_FILE)
        # One walk of the tree for both names (a store holds thousands of homes).
        found.update(
            record.resolve() for record in path.rglob("*.json")
            if record.name in (RECORD_FILE, OLD_RECORD_FILE) and "superseded" not in record.parts
        )
    return sorted(found)


def read_record(path: Path) -> dict[str, Any]:
    """A record file's content, or ValueError saying why it is not a record this version reads."""
    try:
        record = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as error:
        raise ValueError(str(error)) from None
    if not isinstance(record, dict) or "schema_version" not in record:
        raise ValueError("not a shiftbench record (no schema_version)")
    if record["schema_version"] not in READABLE_VERSIONS:
        raise ValueError(
            f"record schema version {record['schema_version']!r} is not known; "
            f"this shiftbench reads versions {', '.join(map(str, READABLE_VERSIONS))}"
        )
    return record


def load_records(paths: PathLike | Iterable[PathLike]) -> pd.DataFrame:
    """One row per record under ``paths`` (a folder or a file, or several; ``str`` or ``Path``,
    see :func:`find_records`), with every record field as a column, ``path`` (the record's
    folder), and the config flattened into dotted columns with their own types
    (``config.arch.order``, ``config.train.lr``), so ``frame.groupby("config.arch.order")``
    works. Files that cannot be read are skipped with a warning and listed in
    ``frame.attrs["skipped"]``; records of the old layout are read, with one note saying how to
    move them into the store."""
    import pandas as pd

    rows, skipped, old = [], [], 0
    for path in find_records(paths):
        try:
            record = read_record(path)
        except ValueError as error:
            skipped.append(f"{path}: {error}")
            continue
        old += path.name == OLD_RECORD_FILE
        rows.append({**record, "path": str(path.parent)})
    for problem in skipped:
        warnings.warn(f"skipped {problem}", stacklevel=2)
    if old:
        warnings.warn(
            f"read {old} records of the old layout ({OLD_RECORD_FILE}); "
            "shiftbench-migrate FOLDER RESULTS_DIR moves them into the store", stacklevel=2,
        )
    frame = pd.DataFrame(rows)
    if "config" in frame:
        configs = [config if isinstance(config, dict) else {} for config in frame["config"]]
        flat = pd.json_normalize(configs, sep=".").add_prefix("config.")
        frame = pd.concat([frame, flat.set_index(frame.index)], axis=1)
    frame.attrs["skipped"] = skipped
    return with_scores(frame)


def with_scores(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with task-neutral columns: ``metric`` (the task's primary metric), ``better``
    (``higher`` or ``lower``) and ``<split>_score`` for each of :data:`SCORED`, read from each
    record's ``<split>_<metric>``."""
    from shiftbench.registry import TASKS

    # Records of version 1 name no task: they are classification's.
    names = frame["task"] if "task" in frame else ["classification"] * len(frame)
    tasks = [TASKS[task] if task in TASKS else TASKS["classification"] for task in names]
    rows = frame.to_dict("records")
    frame["metric"] = [task.metric for task in tasks]
    frame["better"] = ["higher" if task.higher_is_better else "lower" for task in tasks]
    for split in SCORED:
        frame[f"{split}_score"] = [row.get(f"{split}_{task.metric}") for task, row in zip(tasks, rows)]
    return frame
