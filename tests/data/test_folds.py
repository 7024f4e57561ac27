"""Outer folds (``folds=K``): test parts of repeated stratified K-fold cross-validation, with the
validation part carved from the other folds only."""

import numpy as np
from sklearn.datasets import load_digits

from shiftbench.data.dataset import Dataset, Splits
from shiftbench.data.splits import fold_split
from shiftbench.graphs.standard import line_graph


def digits_dataset() -> Dataset:
    # scikit-learn's digits: 1797 samples, 10 classes of 174 to 183 (scikit-learn documentation).
    images, labels = load_digits(return_X_y=True)
    order = np.arange(len(labels))
    splits = Splits(train=order[:1077], val=order[1077:1437], test=order[1437:])
    return Dataset(images[:, :, None].astype(np.float32), labels.astype(np.int64), splits, 10, line_graph(64), "digits")


def test_the_test_parts_of_one_repetition_are_disjoint_and_cover_every_sample_once():
    # K-fold cross-validation (common practice, no source): each sample is tested exactly once.
    dataset = digits_dataset()
    tests = [fold_split(dataset, 5, fold).splits.test for fold in range(5)]
    assert np.array_equal(np.sort(np.concatenate(tests)), np.arange(dataset.samples))


def test_validation_comes_from_the_other_folds_in_the_datasets_own_ratio():
    dataset = digits_dataset()
    for split in (0, 3, 7):
        parts = fold_split(dataset, 5, split).splits
        assert not set(parts.val) & set(parts.test) and not set(parts.train) & set(parts.test)
        assert len(parts.train) + len(parts.val) + len(parts.test) == dataset.samples
        assert abs(len(parts.val) / (len(parts.train) + len(parts.val)) - 360 / 1437) < 0.01


def test_every_test_part_keeps_the_class_proportions():
    # Stratified K-fold (scikit-learn's StratifiedKFold): each class splits within one sample of even.
    dataset = digits_dataset()
    counts = np.bincount(dataset.labels)
    for fold in range(5):
        tested = np.bincount(dataset.labels[fold_split(dataset, 5, fold).splits.test], minlength=10)
        assert np.all(np.abs(tested - counts / 5) <= 1)


def test_a_new_repetition_shuffles_the_folds_anew():
    dataset = digits_dataset()
    first, second = fold_split(dataset, 5, 0).splits.test, fold_split(dataset, 5, 5).splits.test
    assert not np.array_equal(first, second)
    assert np.array_equal(first, fold_split(dataset, 5, 0).splits.test)  # and the same fold again is the same
