"""Curves where people already look at them: a results folder exported as TensorBoard runs.

One run a record, named by what it is (``graph_conv-native-seed2-<hash>``): its learning curve
as scalars per epoch (``train/loss``, ``train/<metric>``, ``val/loss``, ``val/<metric>``, the
metric being the task's: ``accuracy``, ``rmse``), its test figure at its last epoch, and its config as text. Written with ``torch.utils.tensorboard``
(which needs the ``tensorboard`` package: the ``tracking`` extra); the records are not touched.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from pathlib import Path

import pandas as pd

from shiftbench.records import CURVE_FILE, load_records



def run_name(record: pd.Series) -> str:
    """``family-graph-seed<N>-<first 8 of the config hash>``: unique, and readable in a list."""
    return f"{record['family']}-{record['graph']}-seed{record['seed']}-{str(record['config_hash'])[:8]}"


def export_tensorboard(paths: Iterable[Path], out: Path) -> list[Path]:
    """Write one TensorBoard run under ``out`` for each completed record under ``paths``;
    return the runs' folders."""
    try:
        from torch.utils.tensorboard import SummaryWriter
    except ImportError:
        raise ValueError("exporting to TensorBoard needs the tensorboard package: pip install 'shiftbench[tracking]'") from None
    records = load_records(list(paths))
    written = []
    for _, record in records.iterrows():
        if record.get("status") not in ("completed", "timed_out"):
            continue
        folder = out / run_name(record)
        with SummaryWriter(log_dir=str(folder)) as writer:
            curve_file = Path(record["path"]) / CURVE_FILE
            curve = pd.read_csv(curve_file) if curve_file.is_file() else pd.DataFrame()
            metric = record["metric"]
            scalars = {"train_loss": "train/loss", f"train_{metric}": f"train/{metric}", "val_loss": "val/loss",
                       f"val_{metric}": f"val/{metric}"}
            for _, row in curve.iterrows():
                for column, tag in scalars.items():
                    if pd.notna(row[column]):  # a run without a validation split has no val figures
                        writer.add_scalar(tag, float(row[column]), int(row["epoch"]))
            last = int(record["epochs_run"]) if pd.notna(record.get("epochs_run")) else 0
            writer.add_scalar(f"test/{metric}", float(record["test_score"]), last)
            writer.add_text("config", "```\n" + json.dumps(record["config"], indent=2) + "\n```")
        written.append(folder)
    return written
