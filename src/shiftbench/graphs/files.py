"""The user's graph from a file: an edge-list CSV, a scipy sparse ``.npz``, GraphML or GML.

- ``.csv``: a header ``source,target`` or ``source,target,weight``; ids are integers
  ``0..nodes-1`` (the data's nodes), an edge ``source -> target``. An undirected graph lists
  each edge both ways.
- ``.npz``: a matrix saved with ``scipy.sparse.save_npz``, read as ``A[target, source]``.
- ``.graphml`` / ``.gml``: read by networkx. When the node ids are exactly the integers
  ``0..n-1`` (GraphML stores them as text), node ``i`` is the data's node ``i`` whatever the
  file's order (noted in the record when the order differs); otherwise nodes are taken in the
  file's order. An undirected graph gives each edge both ways. The ``weight`` attribute is used
  when present.

Duplicate edges are summed and self-loops kept (both noted in the record). Every problem is a
:class:`ConfigError` with one line naming it and the fix.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import zipfile
from collections.abc import Callable
from functools import partial
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import scipy.sparse as sp
import torch

from shiftbench.config import Check, input_file
from shiftbench.csv_input import read_user_csv
from shiftbench.errors import file_error
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.operators import GraphConfig
from shiftbench.npz_input import require_fits_in_memory
from shiftbench.registry import GRAPH_SOURCES, GraphSource

if TYPE_CHECKING:
    import networkx as nx

SUFFIXES = (".csv", ".npz", ".graphml", ".gml")


Fail = Callable[[Path, str], Exception]


def read_edge_list(path: Path, nodes: int, fail: Fail) -> Graph:
    import pandas as pd

    table = read_user_csv(path, fail, "write a header source,target[,weight] and one edge a row")
    columns = [str(column).strip() for column in table.columns]
    if columns not in (["source", "target"], ["source", "target", "weight"]):
        raise fail(path, f"has columns {columns}; accepted: a header source,target or source,target,weight")
    table.columns = columns
    if table.empty:
        raise fail(path, "has a header but no edges; accepted: one edge a row")
    ids = table[["source", "target"]]
    if not all(pd.api.types.is_integer_dtype(ids[column]) for column in ids):
        raise fail(path, "source and target must be integer node ids 0..nodes-1")
    index = ids.to_numpy(dtype=np.int64).T
    if index.size and (index.min() < 0 or index.max() >= nodes):
        bad = int(index.max()) if index.max() >= nodes else int(index.min())
        raise fail(path, f"node id {bad} is outside the data's {nodes} nodes; accepted: ids 0..{nodes - 1}")
    repeated = ids.duplicated(keep=False)
    if repeated.any():
        # File lines: the header is line 1, the first edge line 2.
        lines = [int(row) + 2 for row in np.flatnonzero(repeated.to_numpy())]
        first = ids[repeated].iloc[0]
        raise fail(path, f"lists edge {first['source']} -> {first['target']} more than once (lines "
                    f"{', '.join(map(str, lines[:6]))}{', ...' if len(lines) > 6 else ''}); accepted: each edge once")
    weight = None
    if "weight" in table:
        if not pd.api.types.is_numeric_dtype(table["weight"]) or not np.isfinite(table["weight"]).all():
            raise fail(path, "weight column holds values that are not finite numbers")
        weight = table["weight"].to_numpy(dtype=np.float64)
    graph = Graph.from_edge_index(index, weight, nodes=nodes, name="file")
    return replace(graph, notes=(*graph.notes, *one_way_note(index)))


def one_way_note(index: np.ndarray) -> tuple[str, ...]:
    """A note when no edge of a ``(2, edges)`` edge list is given both ways: the graph is read
    as directed, which a user meaning an undirected one would not see otherwise."""
    edges = {(int(source), int(target)) for source, target in index.T if source != target}
    if not edges or any((target, source) in edges for source, target in edges):
        return ()
    return ("read as directed: no edge is listed both ways (list each edge both ways for an undirected graph)",)


def read_sparse_matrix(path: Path, fail: Fail) -> Graph:
    require_fits_in_memory(path, fail)
    try:
        matrix = sp.load_npz(path)
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile):
        raise fail(path, "is not a matrix saved with scipy.sparse.save_npz") from None
    if matrix.shape[0] != matrix.shape[1]:
        raise fail(path, f"holds a {matrix.shape[0]}x{matrix.shape[1]} matrix; accepted: a square adjacency")
    if np.iscomplexobj(matrix.data):
        raise fail(path, "holds complex weights; accepted: real weights")
    if not np.issubdtype(matrix.data.dtype, np.number) and matrix.data.dtype != bool:
        raise fail(path, f"holds weights of dtype {matrix.data.dtype}; accepted: real numbers")
    try:  # index arrays a hand-made file may get wrong: out of range, not monotonic
        if hasattr(matrix, "check_format"):
            matrix.check_format(full_check=True)
        else:
            sp.coo_matrix((matrix.data, (matrix.row, matrix.col)), shape=matrix.shape).tocsr().check_format(full_check=True)
    except (ValueError, IndexError) as error:
        raise fail(path, f"holds a malformed sparse matrix ({str(error).splitlines()[0]}); save a valid matrix "
                   "with scipy.sparse.save_npz") from None
    return Graph.from_adjacency(matrix, name="file")


def integer_ids(graph: nx.Graph) -> list | None:
    """The graph's nodes sorted by id when the ids are exactly the integers ``0..n-1`` (as
    numbers or as text, as GraphML stores them); else None."""
    try:
        ids = {int(str(node)): node for node in graph.nodes if str(node).lstrip("-").isdigit()}
    except ValueError:
        return None
    return [ids[index] for index in range(len(ids))] if sorted(ids) == list(range(graph.number_of_nodes())) else None


def read_networkx(path: Path, fail: Fail) -> Graph:
    import networkx as nx

    reader = nx.read_graphml if path.suffix.lower() == ".graphml" else nx.read_gml
    try:
        graph = reader(path)
    except (OSError, nx.NetworkXError, ValueError, SyntaxError) as error:
        kind = "GraphML" if reader is nx.read_graphml else "GML"
        raise fail(path, f"cannot be read as {kind} ({str(error).splitlines()[0]})") from None
    notes: tuple[str, ...] = ()
    by_id = integer_ids(graph)
    if by_id is not None and by_id != list(graph.nodes):
        notes = ("nodes aligned by their integer ids 0..n-1, not by their order in the file",)
    try:
        loaded = Graph.from_networkx(graph, name="file", order=by_id)
    except (TypeError, ValueError):
        raise fail(path, "has edge weights that are not numbers") from None
    if graph.is_multigraph():
        # networkx sums parallel edges when it builds the matrix; say so in the record.
        simple = nx.DiGraph(graph) if graph.is_directed() else nx.Graph(graph)
        parallel = graph.number_of_edges() - simple.number_of_edges()
        notes += (f"{parallel} duplicate edges summed",) if parallel else ()
    return replace(loaded, notes=(*loaded.notes, *notes))


def load_graph_file(path: str, nodes: int, key: str = "graph.path") -> Graph:
    """Read and check a user's graph for data with ``nodes`` nodes; errors name it as ``key``
    (``graph.path`` for the ``file`` source, ``data.graph`` for the graph that signal files carry).
    The graph is named by its file's name."""
    fail = partial(file_error, key)
    file = Path(path).expanduser()
    suffix = file.suffix.lower()
    if suffix not in SUFFIXES:
        raise fail(file, f"has suffix {file.suffix!r}; accepted: {', '.join(SUFFIXES)}")
    if not file.is_file():
        raise fail(file, "no such file; give the path of an edge-list .csv, a scipy .npz, .graphml or .gml")
    if suffix == ".csv":
        graph = read_edge_list(file, nodes, fail)
    elif suffix == ".npz":
        graph = read_sparse_matrix(file, fail)
    else:
        graph = read_networkx(file, fail)
    if graph.nodes != nodes:
        raise fail(file, f"has {graph.nodes} nodes but the data has {nodes}; they must agree")
    if not torch.isfinite(graph.edge_weight).all():
        raise fail(file, "holds weights that are not finite float32 numbers (NaN, infinite, or beyond ±3.4e38); "
                   "accepted: finite weights")
    return replace(graph, name=file.name)


@dataclass
class FileGraphConfig(GraphConfig):
    """The user's graph file (edge-list .csv, scipy .npz, .graphml, .gml)."""

    source: str = "file"
    path: str = input_file(Check(lambda value: value != "", "the path of a graph file (graph.path=...)"))


GRAPH_SOURCES.add(
    GraphSource("file", FileGraphConfig, lambda config, dataset: load_graph_file(config.path, dataset.nodes), "graph file")
)
