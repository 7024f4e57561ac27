"""Train/validation/test splits, fixed by the data seed: stratified by class where samples have
one, plain random where their targets are values (regression)."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from shiftbench.config import FRACTION, declared, require
from shiftbench.data.dataset import DataConfig, Dataset, Splits
from shiftbench.errors import ConfigError


@dataclass
class RandomSplitConfig(DataConfig):
    """A data source split at random (stratified) into train, validation and test."""

    test_fraction: float = declared(FRACTION, 0.2)

    def check(self) -> None:
        super().check()
        require(
            "test_fraction",
            self.test_fraction,
            self.val_fraction + self.test_fraction < 1.0,
            f"a fraction below {1.0 - self.val_fraction:g} (val_fraction + test_fraction < 1)",
        )


def stratified_splits(labels: np.ndarray, val_fraction: float, test_fraction: float, seed: int) -> Splits:
    """Split sample indices so each part keeps the class proportions of ``labels``.

    Args:
        labels: ``(samples,)`` class labels.
        val_fraction, test_fraction: shares of all samples; the rest is training data
            (``val_fraction`` 0: no validation split).
        seed: the data seed (independent of the training seed).
    """
    from sklearn.model_selection import train_test_split

    indices = np.arange(len(labels))
    rest, test = train_test_split(
        indices, test_size=test_fraction, stratify=labels, random_state=seed
    )
    if val_fraction == 0:
        return Splits(train=np.sort(rest), val=rest[:0], test=np.sort(test))
    train, val = train_test_split(
        rest,
        test_size=val_fraction / (1.0 - test_fraction),
        stratify=labels[rest],
        random_state=seed + 1,
    )
    return Splits(train=np.sort(train), val=np.sort(val), test=np.sort(test))


def random_splits(samples: int, val_fraction: float, test_fraction: float, seed: int) -> Splits:
    """Split ``samples`` indices at random (targets without classes to stratify by), with the
    shares and seeding of :func:`stratified_splits`."""
    return stratified_splits(np.zeros(samples, dtype=np.int64), val_fraction, test_fraction, seed)


def has_classes(labels: np.ndarray) -> bool:
    """True for class labels ``(samples,)`` of integers; False for value targets."""
    return labels.ndim == 1 and labels.dtype.kind in "iu"


def resplit(dataset: Dataset, split: int) -> Dataset:
    """The dataset under random split number ``split``: 0 keeps the dataset's own split; any
    other number draws a new split (stratified where samples have classes) of all samples with the same train, validation
    and test sizes (seeded by ``split``), so repeated evaluations differ in their data."""
    if split == 0:
        return dataset
    if dataset.in_time_order:
        raise ConfigError(f"split={split} is not accepted for {dataset.name}, whose samples are in time order (a random "
                          "split would train on later years than it tests); accepted: split=0, or folds=K for "
                          "forward-chaining folds")
    sizes = dataset.splits
    samples = dataset.samples
    test_fraction = len(sizes.test) / samples
    val_fraction = len(sizes.val) / samples
    try:
        if not has_classes(dataset.labels):
            raise ValueError("no classes to stratify by")
        splits = stratified_splits(dataset.labels, val_fraction, test_fraction, 10_000 + split)
    except ValueError:  # a class too small to stratify: draw plainly
        order = np.random.default_rng(10_000 + split).permutation(samples)
        test, val = len(sizes.test), len(sizes.val)
        splits = Splits(train=np.sort(order[test + val:]), val=np.sort(order[test:test + val]), test=np.sort(order[:test]))
    return replace(dataset, splits=splits)


def fold_split(dataset: Dataset, folds: int, split: int) -> Dataset:
    """The dataset under outer fold ``split`` of repeated ``folds``-fold cross-validation.

    ``split = repetition x folds + fold``. Every repetition shuffles all samples once (seeded by
    the repetition) into ``folds`` disjoint test parts that cover the data (scikit-learn's
    ``StratifiedKFold`` where samples have classes, ``KFold`` otherwise); fold ``fold`` is the
    test part. The validation part is carved from the other folds only, in the dataset's own
    ratio of validation to training samples (stratified where it can be), so nothing that
    chooses weights or settings ever comes from the test part. The dataset's own split (a file's
    ``split`` array, an archive's train/test) is not kept: the folds are drawn over all samples.
    """
    from sklearn.model_selection import KFold, StratifiedKFold

    check_fold_count(dataset, folds)
    if dataset.in_time_order:
        return forward_chaining_split(dataset, folds, split % folds)
    repetition, fold = divmod(split, folds)
    samples = dataset.samples
    stratify = has_classes(dataset.labels)
    splitter = (StratifiedKFold if stratify else KFold)(n_splits=folds, shuffle=True, random_state=20_000 + repetition)
    _, test = list(splitter.split(np.zeros(samples), dataset.labels if stratify else None))[fold]
    rest = np.setdiff1d(np.arange(samples), test)
    own = dataset.splits
    share = len(own.val) / max(len(own.train) + len(own.val), 1)
    if share == 0:
        return replace(dataset, splits=Splits(train=rest, val=rest[:0], test=np.sort(test)))
    from sklearn.model_selection import train_test_split

    try:
        train, val = train_test_split(rest, test_size=share, random_state=30_000 + split,
                                      stratify=dataset.labels[rest] if stratify else None)
    except ValueError:  # a class too small to stratify in this fold: carve plainly
        train, val = train_test_split(rest, test_size=share, random_state=30_000 + split)
    return replace(dataset, splits=Splits(train=np.sort(train), val=np.sort(val), test=np.sort(test)))


def forward_chaining_split(dataset: Dataset, folds: int, fold: int) -> Dataset:
    """Outer fold ``fold`` of ``folds`` for samples in time order (scikit-learn's
    ``TimeSeriesSplit``): the samples are cut into ``folds + 1`` consecutive blocks; fold ``k``
    tests block ``k + 1`` and trains on the blocks before it, its validation part the latest of
    them in the dataset's own share, so no fold trains or chooses on a time after its test part.
    Every repetition gives the same folds (there is nothing to shuffle)."""
    from sklearn.model_selection import TimeSeriesSplit

    rest, test = list(TimeSeriesSplit(n_splits=folds).split(np.zeros(dataset.samples)))[fold]
    own = dataset.splits
    share = len(own.val) / max(len(own.train) + len(own.val), 1)
    validation = int(round(share * len(rest)))
    if share and validation == 0:
        validation = 1
    train, val = rest[: len(rest) - validation], rest[len(rest) - validation:]
    return replace(dataset, splits=Splits(train=train, val=val, test=test))


def check_fold_count(dataset: Dataset, folds: int, key: str = "folds") -> None:
    """Refuse more outer folds than the smallest class has samples (each fold tests part of
    every class), or than there are samples for value targets (in time order, ``folds + 1``
    blocks of at least two samples)."""
    if dataset.in_time_order:
        most = dataset.samples // 2 - 1
        if not 2 <= folds <= most:
            raise ConfigError(f"{key}={folds} is not accepted: {dataset.name} holds {dataset.samples} times in order; "
                              f"accepted: an integer from 2 to {most} (forward-chaining folds)")
        return
    smallest = smallest_class(dataset.labels)
    most = smallest if smallest is not None else dataset.samples
    what = f"the smallest class has {smallest} samples" if smallest is not None else f"there are {dataset.samples} samples"
    if folds > most:
        raise ConfigError(f"{key}={folds} is not accepted: {what}; accepted: an integer from 2 to {most} "
                          "(outer folds, each testing part of every class)")


def smallest_class(labels: np.ndarray) -> int | None:
    """The size of the smallest class, or None for value targets (no classes to stratify by)."""
    return int(np.bincount(labels).min()) if has_classes(labels) else None
