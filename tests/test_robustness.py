"""A trained graph_conv on changed graphs: perturbations and other sizes."""

import networkx as nx
import numpy as np
import pytest

from shiftbench.config import TrainConfig
from shiftbench.data import sensor_regimes
from shiftbench.graphs.operators import shift_operator
from shiftbench.models import ShiftPolynomialNet
from shiftbench.robustness import score_on_test, on_shift, perturbation_table, perturbed_graph, transfer_table
from shiftbench.training import seed_everything, train


@pytest.fixture(scope="module")
def trained():
    demo = sensor_regimes(nodes=40, samples_per_class=40)
    seed_everything(0)
    model = ShiftPolynomialNet(shift_operator(demo.native_graph), 1, [8], demo.classes, order=2)
    train(model, demo, TrainConfig(epochs=5), seed=0)
    return demo, model


def degrees(graph):
    return sorted(dict(nx.Graph(graph.to_networkx().to_undirected()).degree()).values())


def test_no_perturbation_reproduces_the_unperturbed_accuracy_exactly(trained):
    demo, model = trained
    table = perturbation_table(model, demo, demo.native_graph, "adjacency", "spectral", fractions=(0.0,), draws=3)
    assert set(table["test_accuracy"]) == {score_on_test(model, demo)}


def test_rewiring_keeps_every_degree_and_dropping_removes_the_fraction(trained):
    # Reference: networkx.double_edge_swap keeps the degree sequence (its documentation).
    demo, _ = trained
    native = demo.native_graph
    assert degrees(perturbed_graph(native, 0.2, "rewire", seed=0)) == degrees(native)
    edges = nx.Graph(native.to_networkx().to_undirected()).number_of_edges()
    dropped = perturbed_graph(native, 0.2, "drop", seed=0)
    assert nx.Graph(dropped.to_networkx().to_undirected()).number_of_edges() == edges - round(0.2 * edges)


def test_a_copy_on_another_graph_leaves_the_original_untouched(trained):
    demo, model = trained
    before = score_on_test(model, demo)
    bigger = sensor_regimes(nodes=80, samples_per_class=40)
    moved = on_shift(model, shift_operator(bigger.native_graph))
    assert moved.layers[0].shift.shape == (80, 80) and model.layers[0].shift.shape == (40, 40)
    assert score_on_test(model, demo) == before


def test_transfer_evaluates_the_same_weights_at_every_size(trained):
    demo, model = trained
    larger = sensor_regimes(nodes=80, samples_per_class=40)
    table = transfer_table(model, [(demo, demo.native_graph), (larger, larger.native_graph)], "adjacency", "spectral")
    assert table["nodes"].tolist() == [40, 80]
    assert table["test_accuracy"].iloc[0] == score_on_test(model, demo)
    assert np.isfinite(table["test_accuracy"]).all()
