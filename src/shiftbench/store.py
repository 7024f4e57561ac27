"""The results store: one home per config, found from its hash, however the job was launched.

```
results_dir/
  store/<config hash>/     the home: record.json, curve.csv, checkpoint.pt while training,
                           claim while a process trains it, superseded/ (records set aside by force)
  <study>/jobs.jsonl       a launch folder: one line per job it asked for, pointing at the home
  sweeps/<date>_<time>/jobs.jsonl
```

A launch never copies records: it appends pointers. Skip, resume and the claim that keeps two
processes from training one config all work on the home.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import socket
import threading
import time
from collections.abc import Iterator
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from shiftbench.checkpoints import CHECKPOINT_FILE
from shiftbench.errors import ConfigError
from shiftbench.records import (
    CURVE_FILE, FINAL_STATUSES, MANIFEST_FILE, OLD_RECORD_FILE, PREDICTIONS_FILE, RECORD_FILE, SCHEMA_VERSION, WEIGHTS_FILE,
    config_hash, write_atomic, write_record,
)
from shiftbench.runtime import process_alive, process_start

STORE_FOLDER = "store"
CLAIM_FILE = "claim"
SUPERSEDED_FOLDER = "superseded"
# The holder of a claim touches it this often, from a thread, however long an epoch takes; a
# claim nobody touched for STALE_CLAIM_SECONDS is taken as dead on any host (a holder killed
# with its machine, or stopped, leaves one behind).
HEARTBEAT_SECONDS = 30
STALE_CLAIM_SECONDS = 10 * 60


def home_of(results_dir: Path, config_hash: str) -> Path:
    return Path(results_dir) / STORE_FOLDER / config_hash


def require_plain_home(home: Path) -> None:
    """A home must be a folder of the store, not a link, and the files a job writes there plain
    files where they exist: a link would have the job write wherever it points, and a folder
    in a file's place would stop the job after its training."""
    if home.is_symlink():
        raise ConfigError(f"{home}: the job's home is a symbolic link (to {os.readlink(home)}); accepted: a plain "
                          "folder in the store (remove the link, and the job trains anew)")
    for name in (RECORD_FILE, CLAIM_FILE, CHECKPOINT_FILE, CURVE_FILE, PREDICTIONS_FILE, WEIGHTS_FILE):
        path = home / name
        if path.is_symlink() or (path.exists() and not path.is_file()):
            kind = "a symbolic link" if path.is_symlink() else "a folder" if path.is_dir() else "not a regular file"
            raise ConfigError(f"{path}: is {kind}; accepted: a plain file the job writes (remove it, and the job runs anew)")


def require_writable_home(home: Path) -> None:
    """A job that will train must be able to write its home (or the store folder above it that
    will hold it): refused in one line before the claim, not as a traceback mid-job."""
    existing = home
    while not existing.exists() and existing != existing.parent:
        existing = existing.parent
    if not os.access(existing, os.W_OK | os.X_OK):
        raise ConfigError(f"{existing}: is not writable here, and the job's home {home.name} must be written; accepted: "
                          f"a store you may write in (chmod u+w {existing})")


def finished_record(home: Path) -> dict[str, Any] | None:
    """The home's record when it is completed or timed out (a rerun skips it), else None."""
    path = home / RECORD_FILE
    try:
        record = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return record if isinstance(record, dict) and record.get("status") in FINAL_STATUSES else None


def _holder_alive(holder: dict[str, Any], claim: Path) -> bool:
    """Whether the claim's holder may still be training: its heartbeat is recent and, on this
    host, its process runs and is the one that claimed (same start time: a pid the system gave
    to another process since does not hold the claim)."""
    try:
        if time.time() - claim.stat().st_mtime >= STALE_CLAIM_SECONDS:
            return False
    except FileNotFoundError:
        return False
    if holder.get("host") != socket.gethostname():
        return True
    pid = holder.get("pid")
    if not isinstance(pid, int) or isinstance(pid, bool) or not process_alive(pid):
        return False
    started, now = holder.get("started"), process_start(pid)
    return started is None or now is None or started == now


def clear_torn_writes(home: Path) -> int:
    """Remove the temporary files (``.NAME.*.tmp``) that writes killed mid-way left in ``home``;
    call it holding the home's claim, when no other process writes there. Returns how many."""
    torn = list(home.glob(".*.tmp"))
    for path in torn:
        path.unlink(missing_ok=True)
    return len(torn)


def claim(home: Path) -> str | None:
    """Claim ``home`` for this process: None when claimed, else who holds it.

    The claim is a file created exclusively (``O_CREAT | O_EXCL``, atomic on local and NFS v3+
    filesystems). A claim whose process has died (same host) or that nobody touched for
    ``STALE_CLAIM_SECONDS`` (another host) is removed and taken over.
    """
    home.mkdir(parents=True, exist_ok=True)
    path = home / CLAIM_FILE
    me = {"host": socket.gethostname(), "pid": os.getpid(), "started": process_start(os.getpid()),
          "since": datetime.now(timezone.utc).isoformat(timespec="seconds")}
    for _ in range(3):
        try:
            handle = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except OSError as error:
            if error.errno != errno.EEXIST:
                raise
            try:
                holder = json.loads(path.read_text(encoding="utf-8") or "{}")
            except (OSError, ValueError):
                holder = {}
            if holder.get("pid") == os.getpid() and holder.get("host") == me["host"]:
                return None
            if holder and _holder_alive(holder, path):
                return f"pid {holder.get('pid')} on {holder.get('host')} since {holder.get('since')}"
            if not holder and time.time() - path.stat().st_mtime < 5:
                return "a process that is writing its claim"  # created a moment ago, content on its way
            path.unlink(missing_ok=True)
            continue
        with os.fdopen(handle, "w") as stream:
            stream.write(json.dumps(me))
        return None
    return "another process (the claim kept changing hands)"


def touch_claim(home: Path) -> None:
    """Show that the holder is alive (see :data:`STALE_CLAIM_SECONDS`)."""
    try:
        os.utime(home / CLAIM_FILE)
    except FileNotFoundError:
        pass


@contextlib.contextmanager
def heartbeat(home: Path) -> Iterator[None]:
    """Touch the home's claim every :data:`HEARTBEAT_SECONDS` while the block runs (a daemon
    thread), so that a live holder's claim never looks stale, however long one epoch or one
    floor's fit takes."""
    stop = threading.Event()

    def beat() -> None:
        while not stop.wait(HEARTBEAT_SECONDS):
            touch_claim(home)

    thread = threading.Thread(target=beat, name=f"claim heartbeat {home.name}", daemon=True)
    thread.start()
    try:
        yield
    finally:
        stop.set()
        thread.join()


def release(home: Path) -> None:
    (home / CLAIM_FILE).unlink(missing_ok=True)


def set_aside(home: Path) -> Path | None:
    """Move the home's record, curve, predictions and weights into ``superseded/<time>/``
    (``force=true`` recomputes without destroying the old figures); the folder, created
    exclusively, or None when there was no record."""
    record = home / RECORD_FILE
    if not record.is_file():
        return None
    folder = home / SUPERSEDED_FOLDER / datetime.now(timezone.utc).strftime("%Y-%m-%dT%H-%M-%S.%f")
    folder.mkdir(parents=True)
    for name in (RECORD_FILE, CURVE_FILE, PREDICTIONS_FILE, WEIGHTS_FILE):
        if (home / name).is_file():
            os.replace(home / name, folder / name)
    return folder


def note_launch(launch: Path, home: Path, config_hash: str, overrides: list[str], outcome: str) -> None:
    """Append the launch's pointer to ``home`` with what this launch did there (``trained``,
    ``resumed``, ``skipped``, ``claimed`` elsewhere, ``failed``): one line, one write, so lines of
    parallel jobs never interleave."""
    launch.mkdir(parents=True, exist_ok=True)
    entry = {
        "config_hash": config_hash,
        "home": os.path.relpath(home.resolve(), launch.resolve()),
        "overrides": overrides,
        "outcome": outcome,
        "when": datetime.now(timezone.utc).isoformat(timespec="seconds"),
    }
    line = (json.dumps(entry) + "\n").encode("utf-8")
    handle = os.open(launch / MANIFEST_FILE, os.O_CREAT | os.O_APPEND | os.O_WRONLY, 0o644)
    try:
        os.write(handle, line)
        os.fsync(handle)
    finally:
        os.close(handle)


def migrate(old: Path, results_dir: Path) -> tuple[int, int]:
    """Move every record of the old layout (``result.json`` in job folders) under ``old`` into
    the store under ``results_dir``, and leave ``old`` a launch folder pointing at the homes.

    A version-1 config gains the keys version 2 added with the values that reproduce it
    (``split: 0``, ``task: classification``), so its hash is the one a rerun would compute.
    Returns how many records were moved, and how many were already in the store (those old
    files are removed too: the store's record wins).
    """
    moved = already = 0
    for path in sorted(old.rglob(OLD_RECORD_FILE)):
        try:
            record = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if not isinstance(record, dict) or record.get("schema_version") != 1 or not isinstance(record.get("config"), dict):
            continue
        config = {"split": 0, "task": "classification", **record["config"]}
        digest = config_hash(config)
        home = home_of(results_dir, digest)
        upgraded = {**record, "schema_version": SCHEMA_VERSION, "config": config, "config_hash": digest, "split": 0,
                    "task": "classification"}
        if finished_record(home) is None:
            write_record(home, upgraded)
            if (path.parent / CURVE_FILE).is_file():
                write_atomic(home / CURVE_FILE, (path.parent / CURVE_FILE).read_bytes())
            moved += 1
        else:
            already += 1
        note_launch(old, home, digest, record.get("overrides", []), "migrated")
        path.unlink()
        (path.parent / CURVE_FILE).unlink(missing_ok=True)
    return moved, already
