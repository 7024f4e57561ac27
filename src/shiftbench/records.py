"""Records: the JSON each job writes, written atomically, and loaded back as a DataFrame."""

from __future__ import annotations

import hashlib
import io
import json
import os
import platform
import subprocess
import tempfile
import warnings
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import pandas as pd
import torch

import shiftbench

SCHEMA_VERSION = 1
RECORD_FILE = "result.json"
CURVE_FILE = "curve.csv"
# Keys of the config that say where output goes, whether to recompute, or how often to save
# progress, not what is computed.
OUTPUT_KEYS = ("results_dir", "force")
TRAIN_RUN_KEYS = ("checkpoint_every",)
# A job in one of these states is done: a rerun skips it.
FINAL_STATUSES = ("completed", "timed_out")


def safe_dirname(name: str) -> str:
    """A folder name made from overrides, as one path component that cannot leave its parent:
    ``%``, ``/`` and ``\\`` percent-encoded (so distinct names stay distinct), and ``.``/``..``
    spelled out."""
    encoded = name.replace("%", "%25").replace("/", "%2F").replace("\\", "%5C")
    return {"": "%00", ".": "%2E", "..": "%2E%2E"}.get(encoded, encoded)


def write_atomic(path: Path, content: str | bytes) -> Path:
    """Write ``content`` (text as UTF-8, or bytes) to ``path`` so that a reader sees the old file
    or the whole new one: write a temporary file in the same folder, flush it to disk, then
    rename it over ``path``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    data = content.encode("utf-8") if isinstance(content, str) else content
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return path


def write_record(folder: Path, record: dict[str, Any]) -> Path:
    return write_atomic(folder / RECORD_FILE, json.dumps(record, indent=2, sort_keys=False) + "\n")


def write_curve(folder: Path, curve: list[dict[str, float]]) -> Path:
    buffer = io.StringIO()
    pd.DataFrame(curve, columns=["epoch", "train_loss", "train_accuracy", "val_loss", "val_accuracy", "seconds"]).to_csv(
        buffer, index=False
    )
    return write_atomic(folder / CURVE_FILE, buffer.getvalue())


def computed_content(config: dict[str, Any]) -> dict[str, Any]:
    """What a job computes: its resolved config minus output locations and run settings."""
    content = {key: value for key, value in config.items() if key not in OUTPUT_KEYS}
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


def find_records(paths: Iterable[Path]) -> list[Path]:
    """Every record file under ``paths`` (a path may also be a record file itself), sorted."""
    found: set[Path] = set()
    for path in paths:
        if path.is_file():
            found.add(path)
        else:
            found.update(path.rglob(RECORD_FILE))
    return sorted(found)


def load_records(paths: Iterable[Path]) -> pd.DataFrame:
    """One row per record under ``paths``, with every record field as a column and ``path``
    (the record's folder). Files that cannot be read are skipped with a warning and listed in
    ``frame.attrs["skipped"]``."""
    rows, skipped = [], []
    for path in find_records(paths):
        try:
            record = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as error:
            skipped.append(f"{path}: {error}")
            continue
        if not isinstance(record, dict) or "schema_version" not in record:
            skipped.append(f"{path}: not a shiftbench record (no schema_version)")
            continue
        if record["schema_version"] != SCHEMA_VERSION:
            skipped.append(
                f"{path}: record schema version {record['schema_version']!r} is not known; "
                f"this shiftbench reads version {SCHEMA_VERSION}"
            )
            continue
        rows.append({**record, "path": str(path.parent)})
    for problem in skipped:
        warnings.warn(f"skipped {problem}", stacklevel=2)
    frame = pd.DataFrame(rows)
    frame.attrs["skipped"] = skipped
    return frame


class CompletedIndex:
    """The completed records under a folder, by config hash: read once, then kept current by
    :meth:`add`, so a sweep of many jobs in one process reads each record once."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.by_hash: dict[str, Path] = {}
        for path in find_records([root]) if root.is_dir() else []:
            try:
                record = json.loads(path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                continue
            if isinstance(record, dict) and record.get("status") in FINAL_STATUSES and "config_hash" in record:
                self.by_hash[record["config_hash"]] = path

    def find(self, config_hash: str) -> Path | None:
        """The record file of a completed job with this hash, if it is still there."""
        path = self.by_hash.get(config_hash)
        return path if path is not None and path.is_file() else None

    def add(self, config_hash: str, path: Path) -> None:
        self.by_hash[config_hash] = path


_INDEXES: dict[Path, CompletedIndex] = {}


def completed_index(root: Path) -> CompletedIndex:
    """The (cached) index of completed records under ``root``."""
    root = root.resolve()
    if root not in _INDEXES:
        _INDEXES[root] = CompletedIndex(root)
    return _INDEXES[root]
