"""Where the decision study keeps its tunings for people and tools to read: an Optuna storage
(Optuna's journal file in the study's folder by default, or a database URL), one study per
candidate, fold and sampler seed, named with a digest of the study's settings.

The study decides from its own seeded, in-memory tunings, replayed from the store on every
run (finished trials are skipped there, so a rerun costs nothing and chooses the same); the
storage receives each finished tuning, so ``optuna-dashboard`` and Optuna's own API show every
trial, and a rerun rewrites its copy with identical trials rather than adding to it.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
from collections.abc import Iterator
from dataclasses import asdict
from pathlib import Path
from typing import Any

from shiftbench.errors import ConfigError

JOURNAL_FILE = "tuning.journal"


def open_storage(setting: str, folder: Path) -> Any | None:
    """The storage ``decision.storage`` names: ``journal`` (``folder/tuning.journal``), ``none``
    (None), or a database URL; one line when it cannot be opened, before any job."""
    import optuna

    if setting == "none":
        return None
    try:
        if setting == "journal":
            folder.mkdir(parents=True, exist_ok=True)
            from optuna.storages.journal import JournalFileBackend

            return optuna.storages.JournalStorage(JournalFileBackend(str(folder / JOURNAL_FILE)))
        return optuna.storages.RDBStorage(setting)
    except Exception as error:  # Optuna and SQLAlchemy refuse a URL in many ways
        first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
        raise ConfigError(f"decision.storage={setting}: cannot be opened ({first}); accepted: journal, none, or a "
                          "database URL that Optuna opens, such as sqlite:///tuning.db") from None


# Study settings that do not change what a tuning draws or scores.
NOT_TUNING = ("rope", "alpha", "storage", "folder", "tuning_seeds")


def settings_digest(study_settings: Any, spaces: dict[str, Any], overrides: list[str]) -> str:
    """Eight hex digits of what a tuning depends on: the study's settings that shape it, the
    search spaces and every job's overrides. A tuning stored under other settings never shares
    a name with this one."""
    shaping = {key: value for key, value in asdict(study_settings).items() if key not in NOT_TUNING}
    text = json.dumps({"study": shaping, "spaces": {name: [asdict(d) for d in space] for name, space in spaces.items()},
                       "overrides": sorted(overrides)}, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:8]


def study_name(dataset: str, candidate: str, unit: int, sampler_seed: int, digest: str) -> str:
    """The stored study's name: what it tuned, where, with which sampler seed and settings."""
    return f"{dataset} | {candidate} | fold {unit} | sampler seed {sampler_seed} | settings {digest}"


@contextlib.contextmanager
def _locked(folder: Path) -> Iterator[None]:
    # Two studies finishing at once would otherwise delete each other's half-written copies (a
    # file of its own: the journal keeps its own lock beside it, for single writes).
    with open(folder / "tuning-storage.lock", "a") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def keep_tuning(storage: Any, folder: Path, name: str, study: Any) -> None:
    """Write ``study``'s trials into ``storage`` under ``name``, replacing an earlier copy."""
    import optuna

    with _locked(folder):
        with contextlib.suppress(KeyError):
            optuna.delete_study(study_name=name, storage=storage)
        copy = optuna.create_study(study_name=name, storage=storage, directions=study.directions)
        copy.add_trials(study.get_trials(deepcopy=False))
