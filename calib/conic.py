"""Problem containers beside the LP: standard-form SDP, convex QP, point set.

All data are plain numbers (unitless) unless a family says otherwise. Each container validates its
shapes and values once, in :meth:`validate`, and is trusted afterwards.

Symmetric-matrix vectorisation (``svec``)
----------------------------------------
A symmetric n x n matrix X is stored as the vector of its lower triangle taken column by column,
with every off-diagonal entry multiplied by sqrt(2)::

    svec(X) = (X00, sqrt2 X10, ..., sqrt2 X(n-1)0, X11, sqrt2 X21, ..., X(n-1)(n-1)),  length n(n+1)/2

This is the vectorisation of SCS's PSD cone, and it keeps inner products: <A, X> = svec(A) . svec(X).
An SDP's constraint matrices A_i are therefore the rows of one matrix ``A`` of shape
(m, n(n+1)/2), so ``A @ svec(X)`` is the vector of <A_i, X>, and a row projection T (k x m) acting
on the stacked constraints is ``T @ A`` (the rows svec(sum_j T_ij A_j)) and ``T @ b``.

Which points the JL bounds count
--------------------------------
A constraint projection of an SDP keeps the geometry of the columns of [A | b] in R^m: one per svec
coordinate plus the right-hand side, n(n+1)/2 + 1 points (:func:`sdp_points`, zero columns
included, as for LPs). A variable projection x = T^T u of a QP must keep the inner products of the
rows of A (bounds counted as rows), the linear cost c and the optimum x* with each other:
rows + 2 points (:func:`qp_points`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional, Sequence

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.problems import Matrix, _check_finite, _finite_or_inf, as_matrix

SQRT2 = float(np.sqrt(2.0))

#: Relative tolerance of the symmetry and convexity checks, scaled by max(1, max |entry|).
SYMMETRY_RTOL = 1e-10
#: QPs with at most this many variables get an eigenvalue check of convexity in :meth:`QP.validate`
#: (larger ones are left to the solver, which refuses a nonconvex Hessian at solve time).
CONVEXITY_CHECK_MAX_VARS = 2000


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


def svec(X) -> np.ndarray:
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


def _max_abs(X) -> float:
    if sp.issparse(X):
        return float(abs(X).max()) if X.nnz else 0.0
    return float(np.abs(X).max()) if X.size else 0.0


def _is_symmetric(X) -> bool:
    return _max_abs(X - X.T) <= SYMMETRY_RTOL * max(1.0, _max_abs(X))


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
        if not _is_symmetric(A.tocsr()):
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


def sdp_points(order: int) -> int:
    """Points a constraint projection of an n x n SDP must keep: the n(n+1)/2 + 1 columns of [A | b].

    >>> sdp_points(10)
    56
    """
    return svec_size(int(order)) + 1


def qp_points(n_inequalities: int) -> int:
    """Points a variable projection of a QP must keep: the rows of A, c and the optimum (rows + 2).

    >>> qp_points(30)
    32
    """
    return int(n_inequalities) + 2


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

    def __post_init__(self) -> None:
        self.C = np.atleast_2d(np.asarray(self.C.toarray() if sp.issparse(self.C) else self.C, dtype=float))
        self.A = as_matrix(self.A)
        self.b = np.asarray(self.b, dtype=float).ravel()

    @classmethod
    def from_matrices(cls, C, constraints: Sequence, b, offset: float = 0.0, name: str = "sdp") -> "StandardSDP":
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
                             "stack svec(A_i) as rows (see calib.conic.svec_stack)")
        if self.b.shape != (self.A.shape[0],):
            raise InputError(self.name, f"b has shape {self.b.shape} but A has {self.A.shape[0]} rows", "give one right-hand side per constraint")
        for label, values in (("C", self.C), ("A", self.A), ("b", self.b)):
            _check_finite(label, self.name, values)
        if not _is_symmetric(self.C):
            raise InputError(self.name, "C is not symmetric", "pass a symmetric cost matrix")
        if not np.isfinite(self.offset):
            raise InputError(self.name, "objective offset is not finite", "use a finite constant")
        return self

    def constraint(self, i: int) -> np.ndarray:
        """The symmetric matrix A_i, shape (n, n)."""
        row = self.A[[i]].toarray().ravel() if sp.issparse(self.A) else self.A[i]
        return smat(row)

    def _vec(self, X) -> np.ndarray:
        X = np.asarray(X, dtype=float)
        return svec(X) if X.ndim == 2 else X

    def objective(self, X) -> float:
        """<C, X> + offset for X given as an (n, n) matrix or as svec(X)."""
        return float(self.c_vec @ self._vec(X) + self.offset)

    def residual(self, X) -> np.ndarray:
        """<A_i, X> - b_i, shape (m,), for X as a matrix or svec."""
        return np.asarray(self.A @ self._vec(X)).ravel() - self.b

    def dual_slack(self, y: np.ndarray) -> np.ndarray:
        """S = C - sum_i y_i A_i, shape (n, n); y is dual feasible when S is PSD."""
        return smat(self.c_vec - np.asarray(self.A.T @ np.asarray(y, dtype=float)).ravel())


@dataclass
class QP:
    """min 1/2 x^T Q x + c^T x + offset s.t. A x <= b, ||B x||_2 <= radius (optional), lower <= x <= upper.

    Attributes
    ----------
    Q : ndarray or scipy.sparse CSR, shape (n, n)
        Symmetric positive semidefinite (the full matrix, both triangles).
    c : ndarray, shape (n,)
    A : ndarray or scipy.sparse CSR, shape (p, n)
        Inequality rows; p may be 0 (default: no rows).
    b : ndarray, shape (p,)
    radius : float or None
        Radius r > 0 of the ball constraint, or None for no ball.
    ball_map : ndarray, scipy.sparse or None, shape (q, n)
        The ball reads ||B x||_2 <= r with B = ball_map; None means B = I. A variable projection
        x = T^T u keeps the original ball by setting ball_map = T^T.
    lower, upper : ndarray, shape (n,)
        Variable bounds, -inf / +inf when absent (default: free variables; magnitudes >= 1e20
        count as infinite).
    offset : float
    name : str
    """

    Q: Matrix
    c: np.ndarray
    A: Optional[Matrix] = None
    b: Optional[np.ndarray] = None
    radius: Optional[float] = None
    ball_map: Optional[Matrix] = None
    lower: Optional[np.ndarray] = None
    upper: Optional[np.ndarray] = None
    offset: float = 0.0
    name: str = "qp"

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        n = self.c.size
        self.Q = as_matrix(self.Q)
        self.A = np.zeros((0, n)) if self.A is None else as_matrix(self.A)
        self.b = np.zeros(0) if self.b is None else np.asarray(self.b, dtype=float).ravel()
        self.ball_map = None if self.ball_map is None else as_matrix(self.ball_map)
        self.radius = None if self.radius is None else float(self.radius)
        self.lower = _finite_or_inf(np.full(n, -np.inf) if self.lower is None else self.lower)
        self.upper = _finite_or_inf(np.full(n, np.inf) if self.upper is None else self.upper)

    @property
    def n_vars(self) -> int:
        return self.c.size

    @property
    def n_rows(self) -> int:
        """Number of inequality rows p of A (bounds not counted)."""
        return self.A.shape[0]

    @property
    def has_ball(self) -> bool:
        return self.radius is not None

    def validate(self) -> "QP":
        """Check shapes, finiteness, symmetry and (up to :data:`CONVEXITY_CHECK_MAX_VARS`) convexity."""
        n = self.n_vars
        if n == 0:
            raise InputError(self.name, "no variables", "a QP needs at least one variable")
        shapes = (("Q", self.Q.shape, (n, n)), ("A", self.A.shape, (self.A.shape[0], n)), ("b", self.b.shape, (self.A.shape[0],)),
                  ("lower", self.lower.shape, (n,)), ("upper", self.upper.shape, (n,)))
        for label, shape, expected in shapes:
            if shape != expected:
                raise InputError(self.name, f"{label} has shape {shape}, expected {expected}", "make the shapes agree with c")
        for label, values in (("Q", self.Q), ("c", self.c), ("A", self.A), ("b", self.b)):
            _check_finite(label, self.name, values)
        if np.isnan(self.lower).any() or np.isnan(self.upper).any() or np.any(self.lower > self.upper):
            raise InputError(self.name, "bounds contain NaN or a lower bound above its upper bound", "fix the bounds")
        self._validate_ball()
        if not _is_symmetric(self.Q):
            raise InputError(self.name, "Q is not symmetric", "pass the full symmetric Hessian (both triangles)")
        if n <= CONVEXITY_CHECK_MAX_VARS:
            dense = self.Q.toarray() if sp.issparse(self.Q) else self.Q
            if np.linalg.eigvalsh(dense)[0] < -SYMMETRY_RTOL * n * max(1.0, _max_abs(dense)):
                raise InputError(self.name, "Q is not positive semidefinite (the QP is not convex)", "pass a convex quadratic")
        return self

    def _validate_ball(self) -> None:
        if self.radius is None:
            if self.ball_map is not None:
                raise InputError(self.name, "ball_map given without a radius", "set radius or drop ball_map")
            return
        if not (np.isfinite(self.radius) and self.radius > 0):
            raise InputError(self.name, f"ball radius must be positive and finite, got {self.radius!r}", "use None for no ball")
        if self.ball_map is not None:
            if self.ball_map.shape[1] != self.n_vars:
                raise InputError(self.name, f"ball_map has shape {self.ball_map.shape}, expected (q, {self.n_vars})", "give one column per variable")
            _check_finite("ball_map", self.name, self.ball_map)

    def objective(self, x: np.ndarray) -> float:
        """1/2 x^T Q x + c^T x + offset."""
        x = np.asarray(x, dtype=float)
        return float(0.5 * x @ (self.Q @ x) + self.c @ x + self.offset)

    def ball_norm(self, x: np.ndarray) -> float:
        """||B x||_2 (B = I when no ball_map)."""
        x = np.asarray(x, dtype=float)
        return float(np.linalg.norm(x if self.ball_map is None else self.ball_map @ x))

    def violation(self, x: np.ndarray) -> float:
        """Largest constraint violation of x (rows, bounds and ball), 0 when x is feasible."""
        x = np.asarray(x, dtype=float)
        parts = [np.asarray(self.A @ x).ravel() - self.b, self.lower - x, x - self.upper]
        if self.has_ball:
            parts.append(np.array([self.ball_norm(x) - self.radius]))
        return float(max(0.0, max((part.max() for part in parts if part.size), default=0.0)))


class PointRows:
    """What a problem made of n points in R^d (rows of ``self.points``, shape (n, d)) offers a projection."""

    points: np.ndarray

    @property
    def n_points(self) -> int:
        return self.points.shape[0]

    @property
    def dim(self) -> int:
        """Ambient dimension d (the projected dimension)."""
        return self.points.shape[1]

    @property
    def columns(self) -> np.ndarray:
        """The points as columns, shape (d, n): what a projector T (k x d) multiplies."""
        return self.points.T


@dataclass
class PointSet(PointRows):
    """n distinct points in R^d; a projection acts on the coordinates (d -> k).

    Attributes
    ----------
    points : ndarray, shape (n, d)
        One point per row.
    name : str
    """

    points: np.ndarray
    name: str = "points"

    def __post_init__(self) -> None:
        self.points = np.asarray(self.points, dtype=float)

    def validate(self) -> "PointSet":
        """Check shape, finiteness and that the points are distinct (distortion ratios need d_ij > 0)."""
        if self.points.ndim != 2 or self.points.shape[0] < 2 or self.points.shape[1] < 1:
            raise InputError(self.name, f"points have shape {self.points.shape}", "give an (n, d) array with n >= 2 points")
        _check_finite("points", self.name, self.points)
        if np.unique(self.points, axis=0).shape[0] != self.n_points:
            raise InputError(self.name, "two points coincide", "remove duplicate points (their distance ratio is undefined)")
        return self
