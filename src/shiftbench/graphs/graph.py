"""The graph: nodes and weighted directed edges, and its conversions.

Convention (used everywhere in shiftbench): an edge ``j -> i`` with weight ``w`` puts ``w`` at
``S[i, j]`` of the adjacency, so ``(S x)_i = sum_j S[i, j] x_j`` collects what flows into ``i``.
``edge_index[0]`` holds sources and ``edge_index[1]`` targets, as in PyG.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import torch

if TYPE_CHECKING:
    import networkx as nx


def symmetrized(matrix: sp.spmatrix) -> sp.spmatrix:
    """``max(A, A^T)`` entrywise: an edge either way becomes an edge both ways."""
    return matrix.maximum(matrix.T)


@dataclass(frozen=True)
class Graph:
    """A graph on ``nodes`` nodes.

    Attributes:
        nodes: number of nodes.
        edge_index: ``(2, edges)`` int64, row 0 the source and row 1 the target of each edge.
        edge_weight: ``(edges,)`` float32 weights.
        positions: optional ``(nodes, dims)`` float coordinates (for plots and geometric sources).
        name: the graph source that made it (``line``, ``knn``, ...).
        notes: what was done to the input on the way in (duplicates summed, self-loops kept),
            copied into the record.
    """

    nodes: int
    edge_index: torch.Tensor
    edge_weight: torch.Tensor
    positions: torch.Tensor | None = None
    name: str = "graph"
    notes: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if self.edge_index.dim() != 2 or self.edge_index.shape[0] != 2:
            raise ValueError(f"edge_index must have shape (2, edges), got {tuple(self.edge_index.shape)}")
        if self.edge_weight.shape != (self.edge_index.shape[1],):
            raise ValueError(
                f"edge_weight must have shape ({self.edge_index.shape[1]},), "
                f"got {tuple(self.edge_weight.shape)}"
            )
        if self.edge_index.numel() and (self.edge_index.min() < 0 or self.edge_index.max() >= self.nodes):
            raise ValueError(f"edge_index holds node ids outside 0..{self.nodes - 1}")
        if self.positions is not None and self.positions.shape[0] != self.nodes:
            raise ValueError(f"positions must have {self.nodes} rows, got {self.positions.shape[0]}")

    @property
    def edges(self) -> int:
        return int(self.edge_index.shape[1])

    def isolated_nodes(self) -> list[int]:
        """Nodes with no edge in or out (self-loops do not count)."""
        source, target = self.edge_index
        linked = torch.zeros(self.nodes, dtype=torch.bool)
        proper = source != target
        linked[source[proper]] = True
        linked[target[proper]] = True
        return torch.nonzero(~linked).ravel().tolist()

    def adjacency(self) -> sp.csr_matrix:
        """The ``(nodes, nodes)`` scipy CSR adjacency with ``A[target, source] = weight``.

        Duplicate edges are summed.
        """
        source, target = self.edge_index.numpy()
        matrix = sp.coo_matrix(
            (self.edge_weight.double().numpy(), (target, source)), shape=(self.nodes, self.nodes)
        )
        return matrix.tocsr()

    def is_symmetric(self) -> bool:
        adjacency = self.adjacency()
        return abs(adjacency - adjacency.T).max() == 0 if adjacency.nnz else True

    def to_networkx(self) -> nx.DiGraph:
        """A networkx DiGraph with edges ``source -> target`` carrying ``weight``."""
        import networkx as nx

        graph = nx.DiGraph()
        graph.add_nodes_from(range(self.nodes))
        source, target = self.edge_index.tolist()
        graph.add_weighted_edges_from(zip(source, target, self.edge_weight.tolist()))
        return graph

    def to_undirected_simple(self) -> nx.Graph:
        """The graph as an undirected networkx graph, one unweighted edge per linked pair."""
        import networkx as nx

        return nx.Graph(self.to_networkx().to_undirected())

    @classmethod
    def from_undirected_simple(
        cls, graph: nx.Graph, nodes: int, name: str, positions: np.ndarray | None = None
    ) -> Graph:
        """The inverse of :meth:`to_undirected_simple` on nodes ``0..nodes-1``: unit weights,
        each edge both ways."""
        import networkx as nx

        matrix = nx.to_scipy_sparse_array(graph, nodelist=range(nodes), weight=None, format="csr")
        return cls.from_adjacency(sp.csr_matrix(matrix), name=name, positions=positions)

    def permuted(self, permutation: torch.Tensor) -> Graph:
        """The same graph with node ``n`` relabelled ``p`` where ``permutation[p] = n`` (so
        signals reordered as ``x[:, permutation]`` live on it)."""
        new_label = torch.empty_like(permutation)
        new_label[permutation] = torch.arange(len(permutation))
        return Graph(self.nodes, new_label[self.edge_index], self.edge_weight, name=self.name)

    def to_torch_sparse(self) -> torch.Tensor:
        """The adjacency as a ``(nodes, nodes)`` torch sparse COO tensor, ``A[target, source]``."""
        indices = torch.stack([self.edge_index[1], self.edge_index[0]])
        return torch.sparse_coo_tensor(
            indices, self.edge_weight, (self.nodes, self.nodes), check_invariants=True
        ).coalesce()

    @classmethod
    def from_adjacency(
        cls, matrix: sp.spmatrix, name: str = "graph", positions: np.ndarray | None = None
    ) -> Graph:
        """A graph from a square scipy sparse matrix read as ``A[target, source] = weight``.

        Duplicate entries (possible in COO input) are summed, edges of weight 0 dropped and
        self-loops kept; each is noted.
        """
        if matrix.shape[0] != matrix.shape[1]:
            raise ValueError(f"an adjacency must be square, got shape {matrix.shape}")
        coo = sp.coo_matrix(matrix)
        entries = coo.nnz
        coo.sum_duplicates()
        summed = entries - coo.nnz
        coo.eliminate_zeros()
        notes = []
        if summed:
            notes.append(f"{summed} duplicate edges summed")
        if entries - summed > coo.nnz:
            notes.append(f"{entries - summed - coo.nnz} edges of weight 0 dropped")
        loops = int((coo.row == coo.col).sum())
        if loops:
            notes.append(f"{loops} self-loops kept")
        edge_index = torch.from_numpy(np.stack([coo.col, coo.row]).astype(np.int64))
        with np.errstate(over="ignore"):  # weights beyond float32 become infinite; the readers refuse them
            edge_weight = torch.from_numpy(coo.data.astype(np.float32))
        return cls(
            nodes=int(matrix.shape[0]),
            edge_index=edge_index,
            edge_weight=edge_weight,
            positions=None if positions is None else torch.as_tensor(positions, dtype=torch.float32),
            name=name,
            notes=tuple(notes),
        )

    @classmethod
    def from_edge_index(
        cls,
        edge_index: torch.Tensor | np.ndarray,
        edge_weight: torch.Tensor | np.ndarray | None = None,
        nodes: int | None = None,
        name: str = "graph",
    ) -> Graph:
        """A graph from a PyG-style ``(2, edges)`` index (row 0 sources, row 1 targets) and optional
        ``(edges,)`` weights (default 1); ``nodes`` defaults to the largest index plus one.
        Duplicate edges are summed."""
        index = torch.as_tensor(edge_index, dtype=torch.int64)
        if index.dim() != 2 or index.shape[0] != 2:
            raise ValueError(f"edge_index must have shape (2, edges), got {tuple(index.shape)}")
        weight = np.ones(index.shape[1]) if edge_weight is None else np.asarray(edge_weight, dtype=np.float64)
        if weight.shape != (index.shape[1],):
            raise ValueError(f"edge_weight must have shape ({index.shape[1]},), got {weight.shape}")
        count = nodes if nodes is not None else (int(index.max()) + 1 if index.numel() else 0)
        if index.numel() and (int(index.min()) < 0 or int(index.max()) >= count):
            raise ValueError(f"edge_index holds node ids outside 0..{count - 1}")
        source, target = index.numpy()
        return cls.from_adjacency(sp.coo_matrix((weight, (target, source)), shape=(count, count)), name=name)

    @classmethod
    def from_networkx(
        cls, graph: nx.Graph, name: str = "graph", weight: str = "weight", order: list | None = None
    ) -> Graph:
        """A graph from networkx; nodes are taken in ``order`` (default: ``graph.nodes`` order)
        and relabelled 0..n-1.

        An undirected networkx graph gives each edge in both directions.
        """
        import networkx as nx

        order = list(graph.nodes) if order is None else order
        matrix = nx.to_scipy_sparse_array(graph, nodelist=order, weight=weight, format="csr")
        # networkx puts an edge u -> v at M[u, v]; our convention wants it at A[v, u].
        return cls.from_adjacency(sp.csr_matrix(matrix).T, name=name)


def as_graph(value: object, name: str = "graph") -> Graph:
    """Accept a graph as users hold it: a :class:`Graph`, a networkx graph, a square scipy sparse
    matrix (read as ``A[target, source]``) or a PyG ``edge_index`` tensor or ``(edge_index,
    edge_weight)`` pair."""
    import networkx as nx

    if isinstance(value, Graph):
        return value
    if isinstance(value, nx.Graph):
        return Graph.from_networkx(value, name=name)
    if sp.issparse(value):
        return Graph.from_adjacency(value, name=name)
    if isinstance(value, tuple) and len(value) == 2:
        return Graph.from_edge_index(value[0], value[1], name=name)
    if isinstance(value, (torch.Tensor, np.ndarray)):
        return Graph.from_edge_index(value, name=name)
    raise TypeError(
        f"cannot make a graph from {type(value).__name__}; accepted: a networkx graph, a scipy sparse "
        "matrix, or a PyG edge_index (optionally with edge weights)"
    )
