"""Training checkpoints: everything a run needs to go on exactly where it stopped.

A checkpoint holds the model's and optimizer's states, every random generator the loop draws
from, the early-stopping state (best weights, their epoch and figures) and the curve so far. It
is written with ``torch.save`` through :func:`records.write_atomic`, so a kill leaves the old
checkpoint or the new one, and read with ``torch.load(weights_only=True)``, which builds
tensors and plain containers only and never runs code from the file.
"""

from __future__ import annotations

import os
import random
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np
import torch

from shiftbench.records import write_atomic

CHECKPOINT_FILE = "checkpoint.pt"


def random_states(order_generator: torch.Generator) -> dict[str, Any]:
    """The states of torch's global generator, the batch-order generator, numpy's and python's,
    as tensors and plain values."""
    name, keys, position, has_gauss, cached = np.random.get_state()
    version, python_state, gauss_next = random.getstate()
    return {
        "torch": torch.get_rng_state(),
        "order": order_generator.get_state(),
        "numpy": {"name": name, "keys": torch.from_numpy(keys.astype(np.int64)), "position": int(position),
                  "has_gauss": int(has_gauss), "cached": float(cached)},
        "python": {"version": version, "state": list(python_state), "gauss_next": gauss_next},
    }


def restore_random_states(states: dict[str, Any], order_generator: torch.Generator) -> None:
    """Put every generator back in the state :func:`random_states` saw."""
    torch.set_rng_state(states["torch"])
    order_generator.set_state(states["order"])
    numpy_state = states["numpy"]
    np.random.set_state((numpy_state["name"], numpy_state["keys"].numpy().astype(np.uint32),
                         numpy_state["position"], numpy_state["has_gauss"], numpy_state["cached"]))
    python_state = states["python"]
    random.setstate((python_state["version"], tuple(python_state["state"]), python_state["gauss_next"]))


def save_checkpoint(folder: Path, state: dict[str, Any]) -> Path:
    """Write ``state`` to ``folder/checkpoint.pt`` atomically, streamed (no copy in memory)."""
    return write_atomic(folder / CHECKPOINT_FILE, lambda stream: torch.save(state, stream))


def load_checkpoint(folder: Path, config_hash: str) -> dict[str, Any] | None:
    """The checkpoint in ``folder`` if there is one for this config hash, else None. A file that
    cannot be read (or holds anything but tensors and plain values) is ignored with a warning."""
    path = folder / CHECKPOINT_FILE
    if not path.is_file():
        return None
    try:
        state = torch.load(path, weights_only=True)
    except Exception as error:  # any unreadable file means: start afresh, and say so
        warnings.warn(f"ignoring unreadable checkpoint {path}: {type(error).__name__}: {error}", stacklevel=2)
        return None
    if not isinstance(state, dict) or state.get("config_hash") != config_hash:
        return None
    return state


def set_checkpoint_aside(folder: Path, why: str) -> Path:
    """Rename a checkpoint that cannot be resumed from to ``checkpoint.unusable.<ns>.pt`` (kept
    for inspection, never read again) and say so; the job then trains afresh."""
    aside = folder / f"checkpoint.unusable.{time.time_ns()}.pt"
    os.replace(folder / CHECKPOINT_FILE, aside)
    print(f"note: the checkpoint in {folder} does not fit this model ({why}); set aside as {aside.name}, "
          "training starts afresh", flush=True)
    return aside


def remove_checkpoint(folder: Path) -> None:
    (folder / CHECKPOINT_FILE).unlink(missing_ok=True)
