"""Semidefinite programs in standard form, with constraints stored as svec rows.

The form (shapes: C (n, n) symmetric; A (m, n(n+1)/2); b (m,); all unitless)::

    minimise  <C, X> + offset   subject to  <A_i, X> = b_i  (i < m),   X symmetric PSD

Row i of ``A`` is svec(A_i) (:mod:`calib.problems.svec`), so ``A @ svec(X)`` is the vector of
<A_i, X> and <C, X> = svec(C) . svec(X). A row projection T (k x m) acting on the stacked
constraints is ``T @ A`` (the rows svec(sum_j T_ij A_j)) and ``T @ b``: the projected SDP has k
constraints on the same n x n matrix (:mod:`calib.reduce.sdp`).

Which points the JL bounds count
--------------------------------
A constraint projection keeps the geometry of the columns of [A | b] in R^m: one per svec
coordinate plus the right-hand side, n(n+1)/2 + 1 points (:attr:`StandardSDP.jl_points`, zero
columns included, as for LPs), whatever m is.

Costs: :meth:`StandardSDP.validate` is O(nnz(A) + n^2); :meth:`StandardSDP.constraint` and
:meth:`StandardSDP.dual_slack` O(n^2) each (plus O(nnz(A)) for the latter).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar, Optional, Sequence

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike

from calib.errors import InputError
from calib.problems.arrays import Matrix, as_matrix, check_finite, is_symmetric
from calib.problems.svec import smat, svec, svec_size, svec_stack


@dataclass
class StandardSDP:
    """min <C, X> + offset s.t. <A_i, X> = b_i (i < m), X symmetric positive semidefinite.

    Attributes
    ----------
    C : ndarray, shape (n, n)
        Symmetric cost matrix.
    A : scipy.sparse CSR or ndarray, shape (m, n(n+1)/2)
        Row i is svec(A_i) (see the module docstring), so ``A @ svec(X)`` gives <A_i, X>.
    b : ndarray, shape (m,)
    offset : float
        Constant added to the objective.
    name : str
    cut_graph : ndarray, shape (n, n), optional
        For a max-cut relaxation, the graph's symmetric weights W: the decision a user takes from
        X is the cut its rounding gives (:mod:`calib.reduce.rounding`).
    """

    C: np.ndarray
    A: Matrix
    b: np.ndarray
    offset: float = 0.0
    name: str = "sdp"
    cut_graph: Optional[np.ndarray] = None

    #: how this kind counts n (the JL points) and m (the projected dimension), as ``calib families`` shows it
    COUNTING: ClassVar[str] = ("n = d(d + 1)/2 + 1 for order d, the svec columns of [A | b] a constraint projection "
                               "must keep; m = the number of linear constraints, reduced to k")

    def __post_init__(self) -> None:
        self.C = np.atleast_2d(np.asarray(self.C.toarray() if sp.issparse(self.C) else self.C, dtype=float))
        self.A = as_matrix(self.A)
        self.b = np.asarray(self.b, dtype=float).ravel()

    @classmethod
    def from_matrices(cls, C: Matrix, constraints: Sequence[Matrix], b: ArrayLike, offset: float = 0.0,
                      name: str = "sdp") -> "StandardSDP":
        """Build from the symmetric matrices A_i themselves (dense or sparse, each n x n)."""
        C = np.atleast_2d(np.asarray(C.toarray() if sp.issparse(C) else C, dtype=float))
        return cls(C=C, A=svec_stack(constraints, C.shape[0], name), b=b, offset=offset, name=name)

    @property
    def order(self) -> int:
        """Matrix order n (X is n x n)."""
        return self.C.shape[0]

    @property
    def n_rows(self) -> int:
        """Number of equality constraints m."""
        return self.A.shape[0]

    @staticmethod
    def jl_points_for(order: int) -> int:
        """JL points of a constraint projection of an SDP of order n: the n(n+1)/2 svec columns of
        A and b, n(n+1)/2 + 1 (module docstring), for counting from a family's sizes before building.

        >>> StandardSDP.jl_points_for(10)
        56
        """
        return svec_size(int(order)) + 1

    @property
    def jl_points(self) -> int:
        """Points a constraint projection T A svec(X) = T b must keep: the svec columns of [A | b],
        n(n+1)/2 + 1 for X of order n (zero columns included, as for an LP)."""
        return self.jl_points_for(self.order)

    @property
    def c_vec(self) -> np.ndarray:
        """svec(C), shape (n(n+1)/2,), so that <C, X> = c_vec . svec(X)."""
        return svec(self.C)

    def validate(self) -> "StandardSDP":
        """Check shapes, finiteness and symmetry of C; raise :class:`InputError` naming the problem."""
        n = self.C.shape[0]
        if n == 0 or self.C.shape != (n, n):
            raise InputError(self.name, f"C has shape {self.C.shape}", "give a square, non-empty cost matrix")
        if self.A.ndim != 2 or self.A.shape[1] != svec_size(n) or self.A.shape[0] == 0:
            raise InputError(self.name, f"A has shape {self.A.shape}, expected (m >= 1, {svec_size(n)}) for n = {n}",
                             "stack svec(A_i) as rows (see calib.problems.svec.svec_stack)")
        if self.b.shape != (self.A.shape[0],):
            raise InputError(self.name, f"b has shape {self.b.shape} but A has {self.A.shape[0]} rows", "give one right-hand side per constraint")
        for label, values in (("C", self.C), ("A", self.A), ("b", self.b)):
            check_finite(label, self.name, values)
        if not is_symmetric(self.C):
            raise InputError(self.name, "C is not symmetric", "pass a symmetric cost matrix")
        if not np.isfinite(self.offset):
            raise InputError(self.name, "objective offset is not finite", "use a finite constant")
        return self

    def constraint(self, i: int) -> np.ndarray:
        """The symmetric matrix A_i, shape (n, n)."""
        row = self.A[[i]].toarray().ravel() if sp.issparse(self.A) else self.A[i]
        return smat(row)

    def _vec(self, X: ArrayLike) -> np.ndarray:
        X = np.asarray(X, dtype=float)
        return svec(X) if X.ndim == 2 else X

    def objective(self, X: ArrayLike) -> float:
        """<C, X> + offset for X given as an (n, n) matrix or as svec(X)."""
        return float(self.c_vec @ self._vec(X) + self.offset)

    def residual(self, X: ArrayLike) -> np.ndarray:
        """<A_i, X> - b_i, shape (m,), for X as a matrix or svec."""
        return np.asarray(self.A @ self._vec(X)).ravel() - self.b

    def dual_slack(self, y: np.ndarray) -> np.ndarray:
        """S = C - sum_i y_i A_i, shape (n, n); y is dual feasible when S is PSD."""
        return smat(self.c_vec - np.asarray(self.A.T @ np.asarray(y, dtype=float)).ravel())
