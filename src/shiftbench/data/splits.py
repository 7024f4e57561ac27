"""Stratified train/validation/test splits, fixed by the data seed."""

from __future__ import annotations

import numpy as np
from sklearn.model_selection import train_test_split

from shiftbench.data.dataset import Splits


def stratified_splits(labels: np.ndarray, val_fraction: float, test_fraction: float, seed: int) -> Splits:
    """Split sample indices so each part keeps the class proportions of ``labels``.

    Args:
        labels: ``(samples,)`` class labels.
        val_fraction, test_fraction: shares of all samples; the rest is training data.
        seed: the data seed (independent of the training seed).
    """
    indices = np.arange(len(labels))
    rest, test = train_test_split(
        indices, test_size=test_fraction, stratify=labels, random_state=seed
    )
    train, val = train_test_split(
        rest,
        test_size=val_fraction / (1.0 - test_fraction),
        stratify=labels[rest],
        random_state=seed + 1,
    )
    return Splits(train=np.sort(train), val=np.sort(val), test=np.sort(test))
