"""The user's own signals from a file, checked before anything trains.

``.npz`` (read with ``allow_pickle=False``): ``signals`` ``(samples, nodes)`` or
``(samples, nodes, features)``; one kind of target: ``labels`` ``(samples,)`` of integers or
strings (classes), ``targets`` ``(samples,)`` or ``(samples, outputs)`` of numbers (a value per
signal), or ``node_targets`` ``(samples, nodes)`` or ``(samples, nodes, outputs)`` of numbers (a
value on every node) with an optional boolean ``mask`` ``(samples, nodes)`` of the entries that
are targets, ``node_labels`` ``(samples, nodes)`` of integer classes with -1 where a node is not a
target (a class on every node), or ``sources`` ``(samples,)`` of node indices (the node where
each signal started); optional ``split`` ``(samples,)`` with 0 train, 1 val, 2 test, optional
``positions`` ``(nodes, dims)``.

``.csv``: a header, one row a sample, a ``label`` column (classes) or ``target`` / ``target_*``
columns (values per signal), every other column a node's value.

Every problem is a :class:`ConfigError` with one line that names it and the fix.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import re
import zipfile
from functools import partial
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import torch

from shiftbench.csv_input import read_user_csv
from shiftbench.data.dataset import Dataset, Splits, keyword_loader
from shiftbench.data.labels import encode_labels
from shiftbench.config import Check, input_file
from shiftbench.data.splits import RandomSplitConfig, random_splits, stratified_splits
from shiftbench.errors import file_error
from shiftbench.npz_input import require_fits_in_memory
from shiftbench.graphs.files import load_graph_file
from shiftbench.graphs.standard import line_graph
from shiftbench.registry import DATASETS, DatasetSource

if TYPE_CHECKING:
    import pandas as pd

SUFFIXES = (".npz", ".csv")
SPLIT_NAMES = {0: "train", 1: "val", 2: "test"}
# The arrays that can hold what is to be predicted; a file holds one of them.
TARGET_ARRAYS = ("labels", "targets", "node_targets", "node_labels", "sources")


_fail = partial(file_error, "data.path")


def first_line(error: Exception) -> str:
    """An exception's message cut to its first line (its type's name when it has none)."""
    lines = str(error).splitlines()
    return lines[0] if lines else type(error).__name__


def read_npz(path: Path) -> dict[str, np.ndarray]:
    if not zipfile.is_zipfile(path):
        raise _fail(path, "cannot be read as .npz (not a zip archive); save it with numpy.savez")
    require_fits_in_memory(path, _fail)
    try:
        with np.load(path, allow_pickle=False) as archive:
            arrays = {key: archive[key] for key in archive.files}
    except ValueError as error:
        if "max_header_size" in str(error):
            raise _fail(path, "has an array header beyond numpy's safety limit; save plain numeric arrays") from None
        if "allow_pickle" in str(error):
            raise _fail(path, "holds pickled Python objects; save plain numeric or string arrays") from None
        raise _fail(path, f"cannot be read as .npz ({first_line(error)}); save it with numpy.savez") from None
    except (OSError, zipfile.BadZipFile, EOFError) as error:
        raise _fail(path, f"cannot be read as .npz ({first_line(error)}); save it with numpy.savez") from None
    # numpy hands back the raw bytes of a member that is not a .npy array.
    not_arrays = [key for key, value in arrays.items() if not isinstance(value, np.ndarray)]
    if not_arrays:
        raise _fail(path, f"member {not_arrays[0]!r} is not a numpy array; save it with numpy.savez")
    return arrays


# An integer label as int64 holds it, written the one way Python writes it ('7', not '007').
INTEGER_LABEL = re.compile(r"^-?(0|[1-9]\d{0,17})$")


def target_columns(columns: list[str]) -> list[str]:
    """The columns of a CSV that hold values to predict: ``target`` and ``target_*``."""
    return [column for column in columns if column == "target" or column.startswith("target_")]


def read_csv(path: Path) -> dict[str, np.ndarray]:
    import pandas as pd

    table = read_user_csv(
        path, _fail, "write a header row with a 'label' column and one column per node", text_columns=("label",)
    )
    targets = target_columns(list(table.columns))
    if "label" in table.columns and targets:
        raise _fail(path, f"has a 'label' column and {targets[0]!r}; accepted: 'label' (classes) or target columns (values), not both")
    if "label" not in table.columns and not targets:
        raise _fail(path, "has no 'label' column; write a header row with a 'label' column (or 'target' columns) and one column per node")
    if table.empty:
        raise _fail(path, "has a header but no rows; accepted: one sample a row")
    nodes = table.drop(columns=["label"] if "label" in table.columns else targets)
    text = [column for column in nodes.columns if not pd.api.types.is_numeric_dtype(nodes[column])]
    if text:
        raise _fail(path, f"column {text[0]!r} is not numeric; every column but 'label' (or the target columns) must hold node values")
    rows = np.arange(len(table))
    for column in nodes.columns:
        values = nodes[column].to_numpy()
        if len(values) >= 3 and (np.array_equal(values, rows) or np.array_equal(values, rows + 1)):
            raise _fail(path, f"column {column!r} holds the row numbers, not node values (a saved index?); drop it")
    if targets:
        return {"signals": nodes.to_numpy(dtype=np.float64), "targets": table[targets].to_numpy()}
    return {"signals": nodes.to_numpy(dtype=np.float64), "labels": _labels_from_text(path, table["label"])}


def _labels_from_text(path: Path, label: pd.Series) -> np.ndarray:
    """Label cells as written: integers where every cell is one written plainly (and fits
    int64), else text, so labels that differ only beyond float precision, or only in how they
    are written, stay apart."""
    empty = label.isna() | (label.str.strip() == "")
    if empty.any():
        line = int(np.flatnonzero(empty.to_numpy())[0]) + 2  # the header is line 1
        raise _fail(path, f"has {int(empty.sum())} empty label cells (first on line {line}); give every row its label")
    cells = label.str.strip()
    if cells.map(lambda cell: bool(INTEGER_LABEL.match(cell))).all():
        return cells.map(int).to_numpy(dtype=np.int64)
    return cells.to_numpy(dtype=str)


def _check_signals(path: Path, signals: np.ndarray) -> np.ndarray:
    if signals.ndim not in (2, 3):
        raise _fail(path, f"signals has shape {signals.shape}; accepted: (samples, nodes) or (samples, nodes, features)")
    if signals.shape[0] == 0 or signals.shape[1] < 2 or (signals.ndim == 3 and signals.shape[2] == 0):
        raise _fail(path, f"signals has shape {signals.shape}; accepted: at least 1 sample, 2 nodes and 1 feature")
    if signals.ndim == 2:
        signals = signals[:, :, None]
    if not np.issubdtype(signals.dtype, np.number) or np.issubdtype(signals.dtype, np.complexfloating):
        raise _fail(path, f"signals has dtype {signals.dtype}; accepted: real numbers")
    bad = ~np.isfinite(signals)
    if bad.any():
        sample, node, _ = np.argwhere(bad)[0]
        raise _fail(
            path,
            f"signals holds {int(bad.sum())} NaN or infinite values (first at sample {sample}, node {node}); "
            "remove or impute them",
        )
    return signals.astype(np.float32)


def _check_labels(path: Path, labels: np.ndarray, samples: int) -> tuple[np.ndarray, list[str]]:
    if labels.ndim != 1:
        raise _fail(path, f"labels has shape {labels.shape}; accepted: (samples,)")
    if len(labels) != samples:
        raise _fail(path, f"signals has {samples} samples but labels has {len(labels)}; they must agree")
    if labels.dtype.kind == "f":
        if not np.isfinite(labels).all() or (labels != np.round(labels)).any():
            raise _fail(path, "labels are not all integers; accepted: integer or string class labels")
        labels = labels.astype(np.int64)
    elif labels.dtype.kind == "S":  # bytes: read as UTF-8 text, as a CSV's labels are
        try:
            labels = np.char.decode(labels, "utf-8")
        except UnicodeDecodeError:
            raise _fail(path, "labels are bytes that are not UTF-8 text; save them as str or integers") from None
    elif labels.dtype.kind not in "iuU":
        raise _fail(path, f"labels have dtype {labels.dtype}; accepted: integer or string class labels")
    codes, order = encode_labels(labels)
    if len(order) < 2:
        raise _fail(path, f"labels hold a single class ({str(order[0])!r}); accepted: at least 2 classes")
    return codes, [str(name) for name in order]


def _real(path: Path, name: str, values: np.ndarray) -> np.ndarray:
    """``values`` as float32, or a one-line refusal of text, complex or object arrays."""
    if not np.issubdtype(values.dtype, np.number) or np.issubdtype(values.dtype, np.complexfloating):
        raise _fail(path, f"{name} have dtype {values.dtype}; accepted: real numbers (classes go in 'labels')")
    return values.astype(np.float32)


def _check_targets(path: Path, targets: np.ndarray, samples: int) -> np.ndarray:
    """A value per signal: ``(samples,)`` or ``(samples, outputs)``, finite -> ``(samples, outputs)``."""
    if targets.ndim not in (1, 2) or len(targets) != samples or targets.size == 0:
        raise _fail(path, f"targets have shape {targets.shape}; accepted: ({samples},) or ({samples}, outputs)")
    targets = _real(path, "targets", targets).reshape(samples, -1)
    if not np.isfinite(targets).all():
        sample = int(np.argwhere(~np.isfinite(targets))[0][0])
        raise _fail(path, f"targets hold NaN or infinite values (first at sample {sample}); remove those samples")
    return targets


def _check_node_targets(path: Path, targets: np.ndarray, mask: np.ndarray | None, samples: int, nodes: int) -> np.ndarray:
    """Values on every node ``(samples, nodes[, outputs])`` -> ``(samples, nodes, outputs)`` with
    NaN where ``mask`` ``(samples, nodes)`` says an entry is not a target; the entries that are
    must be finite, and at least one must be."""
    if targets.ndim not in (2, 3) or targets.shape[:2] != (samples, nodes) or targets.size == 0:
        raise _fail(path, f"node_targets have shape {targets.shape}; accepted: ({samples}, {nodes}) or ({samples}, {nodes}, outputs)")
    targets = _real(path, "node_targets", targets).reshape(samples, nodes, -1)
    scored = np.ones((samples, nodes), dtype=bool)
    if mask is not None:
        if mask.shape != (samples, nodes) or mask.dtype != np.bool_:
            raise _fail(path, f"mask has shape {mask.shape} and dtype {mask.dtype}; accepted: booleans ({samples}, {nodes})")
        if not mask.any():
            raise _fail(path, "mask hides every node; accepted: True where a node's value is a target, somewhere")
        scored = mask
    bad = scored[:, :, None] & ~np.isfinite(targets)
    if bad.any():
        sample, node, _ = np.argwhere(bad)[0]
        where = "where mask is True " if mask is not None else ""
        raise _fail(path, f"node_targets hold NaN or infinite values {where}(first at sample {sample}, node {node}); "
                          "mark them False in a boolean 'mask' (samples, nodes), or fill them")
    return np.where(scored[:, :, None], targets, np.nan).astype(np.float32)


def _integers(path: Path, name: str, values: np.ndarray) -> np.ndarray:
    """``values`` as int64, or a one-line refusal of anything but integers (floats that are)."""
    if values.dtype.kind == "f" and np.isfinite(values).all() and (values == np.round(values)).all():
        values = values.astype(np.int64)
    if values.dtype.kind not in "iu":
        raise _fail(path, f"{name} have dtype {values.dtype}; accepted: integers")
    return values.astype(np.int64)


def _check_node_labels(path: Path, labels: np.ndarray, samples: int, nodes: int) -> np.ndarray:
    """Classes on every node ``(samples, nodes)``: integers >= 0, -1 where not a target, and
    at least one target."""
    if labels.shape != (samples, nodes):
        raise _fail(path, f"node_labels have shape {labels.shape}; accepted: ({samples}, {nodes})")
    labels = _integers(path, "node_labels", labels)
    if labels.min() < -1 or labels.max() < 0:
        raise _fail(path, "node_labels hold values below -1 or no class at all; accepted: classes 0, 1, ... and -1 "
                          "where a node is not a target")
    return labels


def _check_sources(path: Path, sources: np.ndarray, samples: int, nodes: int) -> np.ndarray:
    """The node each signal started at: ``(samples,)`` integers in ``0..nodes - 1``."""
    if sources.shape != (samples,):
        raise _fail(path, f"sources have shape {sources.shape}; accepted: ({samples},)")
    sources = _integers(path, "sources", sources)
    if sources.min() < 0 or sources.max() >= nodes:
        raise _fail(path, f"sources hold node {int(sources.min() if sources.min() < 0 else sources.max())}; "
                          f"accepted: node indices 0..{nodes - 1}")
    return sources


def _check_split(path: Path, split: np.ndarray, labels: np.ndarray) -> Splits:
    samples = len(labels)
    if split.shape != (samples,):
        raise _fail(path, f"split has shape {split.shape}; accepted: ({samples},), one entry a sample")
    unknown = sorted(set(np.unique(split).tolist()) - set(SPLIT_NAMES))
    if unknown:
        raise _fail(path, f"split holds {unknown[0]!r}; accepted: 0 (train), 1 (val), 2 (test)")
    parts = {name: np.flatnonzero(split == code) for code, name in SPLIT_NAMES.items()}
    empty = [name for name, indices in parts.items() if len(indices) == 0]
    if empty:
        raise _fail(path, f"split has no {empty[0]} samples; give each of train, val and test at least one")
    if labels.ndim == 1 and labels.dtype.kind in "iu" and len(np.unique(labels[parts["train"]])) < 2:
        raise _fail(path, "split's train part holds a single class; give the train samples at least 2 classes")
    return Splits(**parts)


def _check_positions(path: Path, positions: np.ndarray, nodes: int) -> np.ndarray:
    if positions.ndim != 2 or positions.shape[0] != nodes or not np.isfinite(positions).all():
        raise _fail(path, f"positions has shape {positions.shape}; accepted: finite ({nodes}, dims)")
    return positions


def _random_splits(path: Path, labels: np.ndarray | None, samples: int, val_fraction: float, test_fraction: float,
                   seed: int) -> Splits:
    """Train/val/test parts drawn at random, stratified by class ``labels`` (None: targets without
    classes); a file too small for three parts is refused in one line."""
    if labels is not None:
        counts = np.bincount(labels)
        smallest = int(counts.argmin())
        if counts[smallest] < 3:
            raise _fail(
                path,
                f"class {smallest} has {counts[smallest]} samples; each class needs at least 3 for a stratified "
                "train/val/test split (or give a 'split' array)",
            )
    elif samples < 3:
        raise _fail(path, f"has {samples} samples; a train/val/test split needs at least 3 (or give a 'split' array)")
    try:
        if labels is None:
            return random_splits(samples, val_fraction, test_fraction, seed)
        return stratified_splits(labels, val_fraction, test_fraction, seed)
    except ValueError as error:
        raise _fail(path, f"cannot split it ({_first_sentence(error)}); raise data.val_fraction and "
                    "data.test_fraction, or give a 'split' array") from None


def _first_sentence(error: Exception) -> str:
    return str(error).split(". ")[0].rstrip(".")


def outputs_of(kind: str, labels: np.ndarray) -> int:
    """What a model outputs for each signal or node: the classes of ``labels`` or
    ``node_labels``, one score a node for ``sources``, the outputs of value targets."""
    if kind in ("labels", "node_labels"):
        return int(labels.max()) + 1
    return 1 if kind == "sources" else labels.shape[-1]


def load_signal_file(
    path: str, seed: int = 0, val_fraction: float = 0.2, test_fraction: float = 0.2, graph: str = ""
) -> Dataset:
    """Read and check a user's signal file, and the graph file ``graph`` that comes with it.

    Returns:
        A dataset with signals ``(samples, nodes, features)``. Its native graph is the graph
        file when one is given, else the directed line graph in the file's column order (named
        ``column_order``: no structure beyond the order of the columns); it carries
        ``positions`` when the signal file has them.
    """
    file = Path(path).expanduser()
    if file.suffix.lower() not in SUFFIXES:
        raise _fail(file, f"has suffix {file.suffix!r}; accepted: .npz or .csv")
    if not file.is_file():
        raise _fail(file, "no such file; give the path of a .npz or .csv file")
    arrays = read_npz(file) if file.suffix.lower() == ".npz" else read_csv(file)
    if "signals" not in arrays:
        raise _fail(file, "has no array 'signals'; save signals (samples, nodes[, features]) and labels (samples,)")
    kinds = [key for key in TARGET_ARRAYS if key in arrays]
    if len(kinds) != 1:
        found = f"both {kinds[0]!r} and {kinds[1]!r}" if kinds else "no array 'labels'"
        raise _fail(file, f"has {found}; save signals (samples, nodes[, features]) and one of labels (samples,) "
                          "(classes), targets (values per signal), node_targets (values on every node), node_labels "
                          "(classes on every node) or sources (the node each signal started at)")
    signals = _check_signals(file, arrays["signals"])
    samples, nodes = signals.shape[:2]
    names: list[str] = []
    if kinds == ["labels"]:
        labels, names = _check_labels(file, arrays["labels"], samples)
    elif kinds == ["targets"]:
        labels = _check_targets(file, arrays["targets"], samples)
    elif kinds == ["node_labels"]:
        labels = _check_node_labels(file, arrays["node_labels"], samples, nodes)
    elif kinds == ["sources"]:
        labels = _check_sources(file, arrays["sources"], samples, nodes)
    else:
        labels = _check_node_targets(file, arrays["node_targets"], arrays.get("mask"), samples, nodes)
    if "split" in arrays:
        splits = _check_split(file, arrays["split"], labels)
    else:
        splits = _random_splits(file, labels if kinds == ["labels"] else None, samples, val_fraction, test_fraction, seed)
    positions = _check_positions(file, arrays["positions"], nodes) if "positions" in arrays else None
    native = replace(
        load_graph_file(graph, nodes, key="data.graph") if graph else replace(line_graph(nodes), name="column_order"),
        positions=None if positions is None else torch.as_tensor(positions, dtype=torch.float32),
    )
    return Dataset(
        signals=signals,
        labels=labels,
        splits=splits,
        classes=outputs_of(kinds[0], labels),
        native_graph=native,
        name=file.stem,
        class_names=tuple(names),
    )



@dataclass
class FileDataConfig(RandomSplitConfig):
    """The user's signals in a ``.npz`` or ``.csv`` file (``test_fraction`` applies when the file
    brings no ``split``), and the graph they live on (``graph``: a graph file, which becomes the
    native graph; empty: the line graph in column order)."""

    source: str = "file"
    path: str = input_file(Check(lambda value: value != "", "the path of a .npz or .csv file (data.path=...)"))
    graph: str = input_file()


DATASETS.add(DatasetSource(
    "file", FileDataConfig, keyword_loader(load_signal_file), "signal file",
    tasks=("classification", "regression", "node_regression", "node_classification", "source_localization"),
))
