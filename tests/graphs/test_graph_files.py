"""Users' graphs: files in four formats and Python objects, with what was fixed noted."""

import networkx as nx
import numpy as np
import scipy.sparse as sp
import torch

from shiftbench.graphs.files import load_graph_file
from shiftbench.graphs.graph import as_graph

# A weighted directed graph on 5 nodes; node 4 is isolated.
EDGES = [(0, 1, 2.0), (1, 2, 0.5), (2, 0, 1.5), (3, 1, 1.0)]


def expected_adjacency():
    matrix = np.zeros((5, 5))
    for source, target, weight in EDGES:
        matrix[target, source] = weight
    return matrix


def test_edge_list_csv_is_read_as_source_to_target(tmp_path):
    path = tmp_path / "g.csv"
    path.write_text("source,target,weight\n" + "".join(f"{s},{t},{w}\n" for s, t, w in EDGES))
    graph = load_graph_file(str(path), nodes=5)
    np.testing.assert_array_equal(graph.adjacency().toarray(), expected_adjacency())
    assert graph.isolated_nodes() == [4]


def test_unweighted_edge_list_gets_unit_weights(tmp_path):
    path = tmp_path / "g.csv"
    path.write_text("source,target\n0,1\n1,2\n")
    assert load_graph_file(str(path), nodes=3).edge_weight.tolist() == [1.0, 1.0]


def test_self_loops_are_kept_with_a_note(tmp_path):
    # (An edge listed twice is refused: see the bad-input corpus.)
    path = tmp_path / "g.csv"
    path.write_text("source,target,weight\n0,1,1\n1,0,1\n2,2,1\n")
    graph = load_graph_file(str(path), nodes=3)
    assert graph.adjacency()[1, 0] == 1.0 and graph.adjacency()[2, 2] == 1.0
    assert graph.notes == ("1 self-loops kept",)


def test_an_edge_list_that_gives_every_edge_one_way_only_is_read_as_directed_with_a_note(tmp_path):
    path = tmp_path / "g.csv"
    path.write_text("source,target\n0,1\n1,2\n")
    graph = load_graph_file(str(path), nodes=3)
    assert graph.adjacency()[1, 0] == 1.0 and graph.adjacency()[0, 1] == 0.0
    assert graph.notes == ("read as directed: no edge is listed both ways (list each edge both ways for an undirected graph)",)
    path.write_text("source,target\n0,1\n1,0\n1,2\n")
    assert load_graph_file(str(path), nodes=3).notes == ()


def test_scipy_npz_round_trips(tmp_path):
    path = tmp_path / "g.npz"
    sp.save_npz(path, sp.csr_matrix(expected_adjacency()))
    np.testing.assert_array_equal(load_graph_file(str(path), nodes=5).adjacency().toarray(), expected_adjacency())


def test_graphml_and_gml_are_read_through_networkx(tmp_path):
    # Reference: networkx's own writers; nodes keep the file's order.
    original = nx.DiGraph()
    original.add_nodes_from(range(5))
    original.add_weighted_edges_from(EDGES)
    for suffix, writer in ((".graphml", nx.write_graphml), (".gml", nx.write_gml)):
        path = tmp_path / f"g{suffix}"
        writer(original, path)
        graph = load_graph_file(str(path), nodes=5)
        np.testing.assert_array_equal(graph.adjacency().toarray(), expected_adjacency())


def test_python_objects_are_accepted_as_graphs():
    networkx_graph = nx.DiGraph()
    networkx_graph.add_nodes_from(range(5))
    networkx_graph.add_weighted_edges_from(EDGES)
    edge_index = torch.tensor([[s for s, _, _ in EDGES], [t for _, t, _ in EDGES]])
    weights = torch.tensor([w for _, _, w in EDGES])
    for value in (
        networkx_graph,
        sp.csr_matrix(expected_adjacency()),
        (edge_index, weights),
    ):
        graph = as_graph(value)
        np.testing.assert_array_equal(graph.adjacency().toarray()[:4, :4], expected_adjacency()[:4, :4])
    assert as_graph(edge_index).edge_weight.tolist() == [1.0] * 4


def test_graphml_with_integer_ids_out_of_order_is_aligned_by_id_and_says_so(tmp_path):
    # Reference: networkx's own adjacency of the same graph with nodes ordered by id.
    graph = nx.Graph()
    graph.add_nodes_from([3, 1, 4, 0, 2])  # the file lists the nodes in this order
    graph.add_edges_from([(3, 1), (4, 0), (0, 2), (2, 3)])
    path = tmp_path / "g.graphml"
    nx.write_graphml(graph, path)
    loaded = load_graph_file(str(path), nodes=5)
    expected = nx.to_numpy_array(graph, nodelist=range(5))
    np.testing.assert_array_equal(loaded.adjacency().toarray(), expected.T)
    assert "nodes aligned by their integer ids 0..n-1, not by their order in the file" in loaded.notes


def test_graphml_with_named_nodes_keeps_the_file_order(tmp_path):
    graph = nx.path_graph(["c", "a", "b"])
    path = tmp_path / "g.graphml"
    nx.write_graphml(graph, path)
    loaded = load_graph_file(str(path), nodes=3)
    np.testing.assert_array_equal(loaded.adjacency().toarray(), nx.to_numpy_array(graph, nodelist=["c", "a", "b"]))
    assert loaded.notes == ()
