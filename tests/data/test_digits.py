"""scikit-learn's digits: the published data, on its pixel grid."""

import networkx as nx
import numpy as np
from sklearn import svm
from sklearn.model_selection import train_test_split

from shiftbench.data.digits import digits


def test_arrays_reproduce_the_published_svc_baseline():
    # Source: scikit-learn's example "Recognizing hand-written digits": SVC(gamma=0.001) on the
    # first half (unshuffled) scores 0.969 on the second half.
    dataset = digits()
    pixels = dataset.signals[:, :, 0].astype(np.float64) * 16.0
    x_train, x_test, y_train, y_test = train_test_split(pixels, dataset.labels, test_size=0.5, shuffle=False)
    assert round(svm.SVC(gamma=0.001).fit(x_train, y_train).score(x_test, y_test), 3) == 0.969


def test_shape_classes_and_pixel_range():
    dataset = digits()
    assert dataset.signals.shape == (1797, 64, 1) and dataset.classes == 10
    assert dataset.signals.min() == 0.0 and dataset.signals.max() == 1.0


def test_native_grid_has_the_edges_of_networkx_grid_2d_graph():
    # Source: networkx.grid_2d_graph(8, 8): 2 * 8 * 7 = 112 undirected edges.
    reference = nx.grid_2d_graph(8, 8)
    graph = digits().native_graph
    undirected = {frozenset(pair) for pair in graph.edge_index.T.tolist()}
    assert len(undirected) == reference.number_of_edges() == 112
    raster = {(r, c): r * 8 + c for r, c in reference.nodes}
    assert undirected == {frozenset((raster[u], raster[v])) for u, v in reference.edges}
