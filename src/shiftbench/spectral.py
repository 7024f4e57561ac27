"""What trained graph filters do in the graph's frequency domain.

A filter with taps ``h_0 .. h_K`` has frequency response ``h(lambda) = sum_k h_k lambda^k`` at
each eigenvalue ``lambda`` of the shift operator: on the eigenvector of ``lambda`` the filter
multiplies by ``h(lambda)``.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse.linalg as spla
import torch

from shiftbench.graphs.operators import is_symmetric
from shiftbench.models.shift_polynomial_net import ShiftPolynomialNet
from shiftbench.models.shift_products import as_scipy

# Up to this many nodes the eigenvalues are computed exactly; beyond, a grid spans the extremes.
EXACT_LIMIT = 2000
GRID_POINTS = 400


def frequencies(shift: torch.Tensor) -> np.ndarray:
    """The eigenvalues of ``shift`` (sorted; complex for a non-symmetric operator), exactly for
    up to 2,000 nodes; beyond, ``GRID_POINTS`` values between the extreme eigenvalues of a
    symmetric operator from scipy's sparse eigensolver."""
    matrix = as_scipy(shift)
    symmetric = is_symmetric(matrix)
    if matrix.shape[0] <= EXACT_LIMIT:
        if symmetric:
            return np.linalg.eigvalsh(matrix.toarray())
        values = np.linalg.eigvals(matrix.toarray())
        return values[np.lexsort((values.imag, values.real))]
    if not symmetric:
        raise ValueError("frequency responses beyond 2,000 nodes need a symmetric shift operator")
    low = spla.eigsh(matrix, k=1, which="SA", return_eigenvectors=False)[0]
    high = spla.eigsh(matrix, k=1, which="LA", return_eigenvectors=False)[0]
    return np.linspace(low, high, GRID_POINTS)


def frequency_response(taps: np.ndarray, eigenvalues: np.ndarray) -> np.ndarray:
    """``h(lambda) = sum_k taps[k] lambda^k``.

    Args:
        taps: ``(K + 1, in, out)`` (or ``(K + 1,)`` for one filter).
        eigenvalues: ``(frequencies,)``.

    Returns:
        ``(frequencies, in, out)`` (or ``(frequencies,)``), complex when the eigenvalues are.
    """
    powers = np.stack([eigenvalues**k for k in range(len(taps))], axis=1)  # (frequencies, K + 1)
    return np.tensordot(powers, taps, axes=([1], [0]))


def layer_responses(model: ShiftPolynomialNet, eigenvalues: np.ndarray) -> list[np.ndarray]:
    """Each layer's responses ``(frequencies, in, out)`` for every input-output channel pair."""
    return [frequency_response(layer.taps.detach().double().numpy(), eigenvalues) for layer in model.layers]


def summarize(responses: np.ndarray) -> dict[str, np.ndarray]:
    """Median and 10-90% band of ``|h(lambda)|`` over channel pairs, per frequency."""
    magnitude = np.abs(responses).reshape(len(responses), -1)  # (frequencies, in, out) -> (frequencies, in * out)
    return {
        "median": np.median(magnitude, axis=1),
        "low": np.quantile(magnitude, 0.1, axis=1),
        "high": np.quantile(magnitude, 0.9, axis=1),
    }
