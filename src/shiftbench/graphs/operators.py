"""Shift operators: the matrix ``S`` whose powers a graph filter takes.

With ``A`` the adjacency (``A[i, j]`` the weight of edge ``j -> i``), ``D`` the diagonal of
weighted in-degrees ``d_i = sum_j A[i, j]`` and ``D_out`` that of out-degrees
``o_j = sum_i A[i, j]`` (equal to ``D`` on an undirected graph):

- ``adjacency``:             ``S = A``
- ``laplacian``:             ``S = D - A``
- ``normalized_adjacency``:  ``S = D^-1/2 A D_out^-1/2``, i.e. ``S[i, j] = A[i, j] / sqrt(d_i o_j)``
- ``normalized_laplacian``:  ``S = I' - D^-1/2 A D_out^-1/2``, ``I'`` the identity on nodes with
  at least one edge (0 on the diagonal of an isolated node, as networkx and scipy give)

Normalizing each edge by its target's in-degree and its source's out-degree keeps every edge of
a directed graph (a source node, with in-degree 0, keeps its outgoing edges) and reduces to the
usual symmetric ``D^-1/2 A D^-1/2`` on undirected graphs; it is the directed normalization of
Rossi et al., "Edge directionality improves learning on heterophilic graphs" (2023), written in
our convention (from memory). On the directed line graph every degree is 1 or 0, so the
normalized adjacency is the delay itself.

``scale: spectral`` divides ``S`` by its spectral radius ``max |lambda(S)|`` (left as is when the
radius is zero, as for the nilpotent directed line graph); ``scale: none`` keeps it.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.sparse.csgraph import connected_components
import torch

from shiftbench.config import Schema, declared, one_of
from shiftbench.errors import ConfigError
from shiftbench.graphs.graph import Graph
from shiftbench.registry import OPERATORS, Operator

SCALES = ("spectral", "none")

# Below this many nodes a dense eigensolver is exact and fast enough.
DENSE_EIGEN_LIMIT = 1024
# A radius below this counts as zero: the operator is (numerically) nilpotent.
ZERO_RADIUS = 1e-9


def adjacency(graph: Graph) -> sp.csr_matrix:
    """``S = A``."""
    return graph.adjacency()


def _degrees(adjacency_matrix: sp.csr_matrix, operator: str) -> np.ndarray:
    """Weighted in-degrees ``d_i = sum_j A[i, j]``; Laplacians refuse negative weights."""
    negative = int((adjacency_matrix.data < 0).sum())
    if negative and operator in ("laplacian", "normalized_laplacian"):
        raise ConfigError(
            f"graph.operator={operator!r} is not accepted for a graph with {negative} negative edge weights; "
            "accepted: adjacency or normalized_adjacency"
        )
    return np.asarray(adjacency_matrix.sum(axis=1)).ravel()


def laplacian(graph: Graph) -> sp.csr_matrix:
    """``S = D - A``."""
    matrix = graph.adjacency()
    return (sp.diags(_degrees(matrix, "laplacian")) - matrix).tocsr()


def _normalized(graph: Graph, operator: str) -> sp.csr_matrix:
    """``D^-1/2 A D_out^-1/2``, a zero scale where a degree is 0 (that side has no edges)."""
    matrix = graph.adjacency()
    in_degree = _degrees(matrix, operator)
    out_degree = np.asarray(matrix.sum(axis=0)).ravel()

    def inverse_root(degree: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return np.where(degree > 0, 1.0 / np.sqrt(np.abs(degree)), 0.0)

    return (sp.diags(inverse_root(in_degree)) @ matrix @ sp.diags(inverse_root(out_degree))).tocsr()


def normalized_adjacency(graph: Graph) -> sp.csr_matrix:
    """``S = D^-1/2 A D_out^-1/2``: ``S[i, j] = A[i, j] / sqrt(d_i o_j)``."""
    return _normalized(graph, "normalized_adjacency")


def normalized_laplacian(graph: Graph) -> sp.csr_matrix:
    """``S = I' - D^-1/2 A D_out^-1/2``, ``I'`` the identity on nodes with at least one edge."""
    connected = np.zeros(graph.nodes)
    connected[graph.edge_index.unique().numpy()] = 1.0
    return (sp.diags(connected) - _normalized(graph, "normalized_laplacian")).tocsr()


for _function in (adjacency, laplacian, normalized_adjacency, normalized_laplacian):
    OPERATORS.add(Operator(_function.__name__, _function))


def operator_matrix(graph: Graph, operator: str) -> sp.csr_matrix:
    """The unscaled ``(nodes, nodes)`` shift operator of ``graph`` as scipy CSR (float64)."""
    return OPERATORS[operator].matrix(graph)


@dataclass
class GraphConfig(Schema):
    """What every graph config has: its source, the shift operator and its scaling. A source
    with no parameters of its own (``native``, ``line``, ``cycle``, ``path``) uses it as is."""

    source: str = "native"
    operator: str = declared(one_of(OPERATORS.names), "adjacency")
    scale: str = declared(one_of(SCALES), "spectral")

    def check_fits(self, nodes: int) -> None:
        """Refuse (ConfigError) a graph that cannot be built on ``nodes`` nodes."""


def is_symmetric(matrix: sp.spmatrix, tolerance: float = 1e-12) -> bool:
    """Whether a square sparse matrix equals its transpose to ``tolerance``."""
    return matrix.nnz == 0 or abs(matrix - matrix.T).max() < tolerance


def spectral_radius(matrix: sp.spmatrix) -> float:
    """``max |lambda|`` over the eigenvalues of a square sparse matrix.

    Exact shortcuts first: 0 for an acyclic pattern (nilpotent, as the directed line graph), the
    common row sum for a nonnegative matrix whose row sums are all equal (as a cycle). Then dense ``numpy.linalg.eigvals`` up to ``DENSE_EIGEN_LIMIT`` nodes, ARPACK above (``eigsh`` for
    symmetric matrices, ``eigs`` otherwise). When ARPACK does not converge, as happens on
    nilpotent matrices, Gelfand's formula ``||S^k||^(1/k)`` with ``k = 64`` gives the estimate.
    """
    nodes = matrix.shape[0]
    if matrix.nnz == 0 or _is_acyclic(matrix):
        return 0.0
    row_sums = np.asarray(matrix.sum(axis=1)).ravel()
    if matrix.data.min() >= 0 and np.ptp(row_sums) <= 1e-12 * max(1.0, abs(row_sums[0])):
        # Nonnegative with equal row sums c: the ones vector has eigenvalue c, and no eigenvalue
        # exceeds the largest row sum (Perron-Frobenius), so the radius is c exactly.
        return float(row_sums[0])
    if nodes <= DENSE_EIGEN_LIMIT:
        return float(np.abs(np.linalg.eigvals(matrix.toarray())).max())
    try:
        if is_symmetric(matrix):
            values = spla.eigsh(matrix, k=1, which="LM", return_eigenvectors=False)
        else:
            values = spla.eigs(matrix, k=1, which="LM", return_eigenvectors=False, maxiter=nodes * 10)
        return float(np.abs(values).max())
    except spla.ArpackNoConvergence:
        return _gelfand_radius(matrix, power=64)


def _is_acyclic(matrix: sp.spmatrix) -> bool:
    """Whether the directed graph of the nonzero pattern has no cycle (self-loops included): then
    the matrix is nilpotent (permutable to strictly triangular form), its radius exactly 0."""
    pattern = sp.csr_matrix(matrix)
    pattern.eliminate_zeros()
    if pattern.diagonal().any():
        return False
    components, _ = connected_components(pattern, directed=True, connection="strong")
    return components == pattern.shape[0]


def _gelfand_radius(matrix: sp.spmatrix, power: int) -> float:
    """Estimate ``||S^k v||^(1/k)`` for a unit vector ``v`` of ones (a lower bound on the
    induced norm ``||S^k||^(1/k)``, which tends to the spectral radius)."""
    vector = np.ones(matrix.shape[0]) / np.sqrt(matrix.shape[0])
    log_growth = 0.0
    for _ in range(power):
        vector = matrix @ vector
        norm = np.linalg.norm(vector)
        if norm == 0.0:
            return 0.0
        log_growth += np.log(norm)
        vector /= norm
    return float(np.exp(log_growth / power))


def shift_operator(graph: Graph, operator: str = "adjacency", scale: str = "spectral") -> torch.Tensor:
    """The shift operator as a ``(nodes, nodes)`` float32 torch sparse CSR tensor."""
    if scale not in SCALES:
        raise ValueError(f"unknown scale {scale!r}; accepted: {', '.join(SCALES)}")
    matrix = operator_matrix(graph, operator)
    if scale == "spectral":
        radius = spectral_radius(matrix)
        if radius > ZERO_RADIUS:
            matrix = matrix / radius
    return scipy_to_torch_csr(sp.csr_matrix(matrix))


def scipy_to_torch_csr(matrix: sp.csr_matrix, dtype: torch.dtype = torch.float32) -> torch.Tensor:
    """A scipy CSR matrix as a torch sparse CSR tensor of the same shape and ``dtype``."""
    matrix = sp.csr_matrix(matrix)
    matrix.sort_indices()
    with warnings.catch_warnings():
        # torch flags CSR as beta on every construction; the products used here are stable.
        warnings.simplefilter("ignore", UserWarning)
        return torch.sparse_csr_tensor(
            torch.from_numpy(matrix.indptr.astype(np.int64)),
            torch.from_numpy(matrix.indices.astype(np.int64)),
            torch.from_numpy(matrix.data).to(dtype),
            size=matrix.shape,
            check_invariants=False,
        )
