"""The coercions and checks every problem container applies to its arrays, in one place.

A constraint matrix is either a dense float ndarray of shape (m, n) or a scipy.sparse CSR array of
that shape (:data:`Matrix`; :func:`as_matrix` is the one coercion). Bounds use +-inf for "absent";
any bound of magnitude >= :data:`INF_BOUND` = 1e20 counts as infinite, the threshold HiGHS uses for
its own infinity (its option ``infinite_bound``, default 1e20; from memory of the HiGHS
options list), so a model read from an MPS file
and one built in Python mean the same thing by a large bound. Symmetry (of an SDP's cost matrix, a
QP's Hessian, an SDP's constraint matrices) is checked to a relative tolerance
:data:`SYMMETRY_RTOL` scaled by max(1, max |entry|).

Costs: every function here is one pass over the entries, O(nnz) for sparse input, O(m n) for dense.
"""

from __future__ import annotations

from typing import Union

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike

from calib.errors import InputError

#: A constraint matrix: dense 2-D ndarray or scipy.sparse matrix/array.
Matrix = Union[np.ndarray, sp.spmatrix, sp.sparray]

#: Bounds at or beyond this magnitude are infinite (HiGHS uses the same threshold).
INF_BOUND = 1e20

#: Relative tolerance of the symmetry and convexity checks, scaled by max(1, max |entry|).
SYMMETRY_RTOL = 1e-10


def finite_or_inf(values: ArrayLike) -> np.ndarray:
    """A float copy of ``values`` with every entry of magnitude >= :data:`INF_BOUND` set to +-inf (same shape).

    >>> finite_or_inf([1.0, 1e20, -3e21]).tolist()
    [1.0, inf, -inf]
    """
    values = np.asarray(values, dtype=float).copy()
    values[values >= INF_BOUND] = np.inf
    values[values <= -INF_BOUND] = -np.inf
    return values


def as_matrix(A: Union[ArrayLike, Matrix]) -> Matrix:
    """Float CSR for sparse input, a 2-D float ndarray otherwise (the one coercion of constraint matrices)."""
    return sp.csr_array(A, dtype=float) if sp.issparse(A) else np.atleast_2d(np.asarray(A, dtype=float))


def check_finite(name: str, where: str, values: Union[ArrayLike, Matrix]) -> None:
    """Raise :class:`InputError` at ``where`` when the array (dense or sparse) ``name`` holds NaN or +-inf."""
    data = values.data if sp.issparse(values) else np.asarray(values)
    if not np.all(np.isfinite(data)):
        raise InputError(where, f"{name} contains NaN or infinite entries", "replace them with finite numbers")


def max_abs(X: Matrix) -> float:
    """max |X_ij| of a dense or sparse array, 0 when it has no (stored) entry.

    >>> max_abs(np.array([[1.0, -4.0]])), max_abs(sp.csr_array((2, 2)))
    (4.0, 0.0)
    """
    if sp.issparse(X):
        return float(abs(X).max()) if X.nnz else 0.0
    return float(np.abs(X).max()) if X.size else 0.0


def is_symmetric(X: Matrix) -> bool:
    """max |X - X^T| <= :data:`SYMMETRY_RTOL` * max(1, max |X|) for a square dense or sparse X.

    >>> is_symmetric(np.array([[1.0, 2.0], [2.0, 3.0]])), is_symmetric(np.array([[1.0, 2.0], [0.0, 3.0]]))
    (True, False)
    """
    return max_abs(X - X.T) <= SYMMETRY_RTOL * max(1.0, max_abs(X))
