"""Symmetric-matrix vectorisation (``svec``): how an SDP's matrices become vectors and rows.

A symmetric n x n matrix X is stored as the vector of its lower triangle taken column by column,
with every off-diagonal entry multiplied by sqrt(2)::

    svec(X) = (X00, sqrt2 X10, ..., sqrt2 X(n-1)0, X11, sqrt2 X21, ..., X(n-1)(n-1)),  length n(n+1)/2

This is the vectorisation of SCS's PSD cone (B. O'Donoghue et al., SCS documentation, "Cones":
the scaled lower triangle, column by column; from memory), and it keeps inner products:
<A, X> = trace(A X) = svec(A) . svec(X), since each off-diagonal pair A_ij X_ij + A_ji X_ji is the
product of the two sqrt(2)-scaled entries. An SDP's constraint matrices A_1..A_m are therefore the
rows of one matrix of shape (m, n(n+1)/2) (:func:`svec_stack`), so ``A @ svec(X)`` is the vector of
<A_i, X> (:class:`calib.problems.sdp.StandardSDP`).

Costs: :func:`svec` and :func:`smat` are O(n^2); :func:`svec_stack` is O(total nonzeros) of the
stacked matrices (each read once, as COO).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike

from calib.errors import InputError
from calib.problems.arrays import is_symmetric

SQRT2 = float(np.sqrt(2.0))


def svec_size(order: int) -> int:
    """Length n(n+1)/2 of svec for an n x n matrix.

    >>> svec_size(5)
    15
    """
    return order * (order + 1) // 2


def svec_order(size: int) -> int:
    """The order n with n(n+1)/2 == size; ValueError when size is not triangular.

    >>> svec_order(15)
    5
    """
    order = int((np.sqrt(8 * size + 1) - 1) // 2)
    if svec_size(order) != size:
        raise ValueError(f"{size} is not n(n+1)/2 for any integer n")
    return order


def svec_positions(order: int) -> tuple[np.ndarray, np.ndarray]:
    """(rows, cols) of the matrix entry behind each svec coordinate (lower triangle, column-major).

    >>> rows, cols = svec_positions(3)
    >>> rows.tolist(), cols.tolist()
    ([0, 1, 2, 1, 2, 2], [0, 0, 0, 1, 1, 2])
    """
    upper_rows, upper_cols = np.triu_indices(order)
    return upper_cols, upper_rows


def svec_index(rows: np.ndarray, cols: np.ndarray, order: int) -> np.ndarray:
    """svec coordinate of entries (rows, cols) of an n x n symmetric matrix (either triangle).

    >>> svec_index(np.array([2, 0]), np.array([1, 1]), 3).tolist()
    [4, 1]
    """
    rows, cols = np.asarray(rows), np.asarray(cols)
    low, high = np.minimum(rows, cols), np.maximum(rows, cols)
    return low * order - low * (low - 1) // 2 + (high - low)


def svec(X: ArrayLike | sp.sparray | sp.spmatrix) -> np.ndarray:
    """svec of a symmetric matrix (dense or sparse), shape (n(n+1)/2,). Only the lower triangle is read.

    >>> svec(np.array([[1.0, 2.0], [2.0, 3.0]])).round(6).tolist()
    [1.0, 2.828427, 3.0]
    """
    X = X.toarray() if sp.issparse(X) else np.asarray(X, dtype=float)
    rows, cols = svec_positions(X.shape[0])
    return X[rows, cols] * np.where(rows == cols, 1.0, SQRT2)


def smat(v: np.ndarray) -> np.ndarray:
    """Inverse of :func:`svec`: the symmetric matrix, shape (n, n).

    >>> smat(np.array([1.0, 2.0 * np.sqrt(2.0), 3.0])).tolist()
    [[1.0, 2.0], [2.0, 3.0]]
    """
    v = np.asarray(v, dtype=float)
    order = svec_order(v.size)
    rows, cols = svec_positions(order)
    X = np.zeros((order, order))
    X[rows, cols] = v / np.where(rows == cols, 1.0, SQRT2)
    X[cols, rows] = X[rows, cols]
    return X


def svec_stack(matrices: Sequence, order: int, where: str = "sdp") -> sp.csr_array:
    """Rows svec(A_i) of symmetric n x n matrices (dense or sparse), CSR of shape (m, n(n+1)/2).

    Raises :class:`InputError` naming the first matrix with the wrong shape or not symmetric.

    >>> svec_stack([np.eye(2), np.array([[0.0, 1.0], [1.0, 0.0]])], 2).toarray().round(6).tolist()
    [[1.0, 0.0, 1.0], [0.0, 1.414214, 0.0]]
    """
    data, cols, rows = [], [], []
    for i, A in enumerate(matrices):
        A = sp.coo_array(A, dtype=float)
        if A.shape != (order, order):
            raise InputError(f"{where}.A[{i}]", f"has shape {A.shape}, expected ({order}, {order})", "give n x n matrices")
        if not is_symmetric(A.tocsr()):
            raise InputError(f"{where}.A[{i}]", "is not symmetric", "pass symmetric constraint matrices")
        lower = A.row >= A.col
        data.append(A.data[lower] * np.where(A.row[lower] == A.col[lower], 1.0, SQRT2))
        cols.append(svec_index(A.row[lower], A.col[lower], order))
        rows.append(np.full(lower.sum(), i))
    shape = (len(rows), svec_size(order))
    if not rows:
        return sp.csr_array(shape)
    stacked = sp.csr_array((np.concatenate(data), (np.concatenate(rows), np.concatenate(cols))), shape=shape)
    stacked.sum_duplicates()
    return stacked
