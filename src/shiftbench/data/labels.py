"""Class labels as the integers 0..C-1, in an order that does not depend on the file."""

from __future__ import annotations

import numpy as np


def label_order(values: np.ndarray) -> list:
    """The distinct labels, sorted numerically when every label reads as a number (so '2' comes
    before '10'), else as text."""
    distinct = list(np.unique(values.astype(str)))
    try:
        return sorted(distinct, key=float)
    except ValueError:
        return sorted(distinct)


def encode_labels(values: np.ndarray, order: list | None = None) -> tuple[np.ndarray, list]:
    """Map labels to int64 codes ``0..C-1`` following ``order`` (default :func:`label_order`).

    Returns:
        ``(codes, order)``: codes of shape ``(samples,)``, and the label text of each code.
    """
    order = label_order(values) if order is None else order
    code = {label: index for index, label in enumerate(order)}
    return np.array([code[label] for label in values.astype(str)], dtype=np.int64), order
