"""Parameter budgets: sized networks land within 5% of the budget, or say why they cannot."""

import numpy as np
import pytest

from shiftbench.models.fc import FcConfig

from shiftbench.models.shift_polynomial_net import GraphConvConfig

from shiftbench.models.line_conv import LineConvConfig
from shiftbench.graphs.operators import shift_operator
from shiftbench.graphs.sources import knn_graph
from shiftbench.models import build_model
from shiftbench.models.budget import BudgetError, fit_budget
from shiftbench.models.parameters import count_parameters


@pytest.mark.parametrize("arch", [FcConfig(hidden=[64, 32]), LineConvConfig(), GraphConvConfig(order=5)], ids=lambda a: a.family)
@pytest.mark.parametrize("budget", [2_000, 20_000, 200_000])
def test_sized_network_lands_within_five_percent(arch, budget):
    sized, count = fit_budget(arch, budget, nodes=64, features=2, classes=5)
    assert abs(count - budget) <= 0.05 * budget
    shift = shift_operator(knn_graph(np.random.default_rng(0).random((64, 2)), 4))
    assert count_parameters(build_model(sized, 64, 2, 5, shift)) == count


def test_widths_keep_their_configured_shape():
    sized, _ = fit_budget(FcConfig(hidden=[200, 100]), 50_000, nodes=64, features=1, classes=4)
    first, second = sized.hidden
    assert abs(first / second - 2.0) < 0.05


def test_a_budget_below_the_smallest_network_names_its_size():
    # At width 1, fc has 4096 weights + 1 bias, then 1 * 4 weights + 4 biases for the classes.
    with pytest.raises(BudgetError, match=r"arch.budget=1000 cannot be met: fc with hidden=\[1\] already has 4,105"):
        fit_budget(FcConfig(), 1000, nodes=4096, features=1, classes=4)
