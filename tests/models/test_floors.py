"""The graph-free floors: the grid a floor chooses from, on validation only."""

import dataclasses

import numpy as np
import pytest

from shiftbench.data import sensor_regimes
from shiftbench.models import floors
from shiftbench.registry import TASKS


def test_a_grid_value_scikit_learn_refuses_is_skipped_and_named_and_the_others_choose(monkeypatch):
    # A planted grid whose first value raises as scikit-learn does for a singular covariance.
    def make(value, seed):
        if value == "singular":
            raise np.linalg.LinAlgError("The covariance matrix of class 0 is not full rank.")
        return floors.logistic(value, seed)

    monkeypatch.setitem(floors.FLOORS, "logistic", dataclasses.replace(floors.FLOORS["logistic"], make=make, grid=("singular", 1.0)))
    result = floors.fit_floor("logistic", sensor_regimes(nodes=8, samples_per_class=20), 0, TASKS["classification"])
    assert result.chosen == {"C": 1.0, "skipped": {"singular": "LinAlgError: The covariance matrix of class 0 is not full rank."}}
    assert 0.0 <= result.test_score <= 1.0


def test_a_floor_fails_only_when_every_value_of_its_grid_does_naming_them_once_per_reason():
    # More features (32) than samples per class in the training part (24): scikit-learn's QDA
    # refuses every regularization of the grid.
    data = sensor_regimes(nodes=32, samples_per_class=40)
    with pytest.raises(floors.FloorFailed, match=r"every value of qda's reg_param failed \(reg_param=0.0, 0.1, 0.3, 0.6, 0.9: "
                                                 r"LinAlgError: The covariance matrix of class 0 is not full rank"):
        floors.fit_floor("qda", data, 0, TASKS["classification"])
