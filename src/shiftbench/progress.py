"""Progress display for one training run: a live line on a terminal, plain lines elsewhere."""

from __future__ import annotations

import sys
from typing import TextIO

# In plain-line mode (logs, sweeps) one line per this many epochs keeps logs readable.
LOG_EVERY = 10


class EpochProgress:
    """Called with each epoch's curve row; ``live`` rewrites one terminal line in place.
    ``label`` (``job 3``) starts every line, so the lines of parallel jobs can be told apart."""

    def __init__(self, epochs: int, live: bool, stream: TextIO | None = None, label: str = "") -> None:
        self.epochs = epochs
        self.live = live
        self.prefix = f"[{label}] " if label else ""
        # Read at construction, not at import, so a redirected stdout is honoured.
        self.stream = stream or sys.stdout

    def __call__(self, row: dict[str, float]) -> None:
        epoch = int(row["epoch"])
        line = self.prefix + (
            f"epoch {epoch:>4}/{self.epochs}  train loss {row['train_loss']:.4f}  "
            + self.validation(row)
        )
        if self.live:
            self.stream.write("\r" + line)
            self.stream.flush()
        elif epoch == 1 or epoch % LOG_EVERY == 0:
            self.stream.write(line + "\n")
            self.stream.flush()

    @staticmethod
    def validation(row: dict[str, float]) -> str:
        """``val <metric> <figure>`` from a curve row (``val_accuracy``, ``val_rmse``)."""
        key = next(key for key in row if key.startswith("val_") and key != "val_loss")
        return "no validation split" if row[key] is None else f"val {key[4:]} {row[key]:.3f}"

    def close(self) -> None:
        if self.live:
            self.stream.write("\n")
            self.stream.flush()
