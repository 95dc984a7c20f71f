"""Convex quadratic programs, with an optional Euclidean ball, whose variables are projected.

The form (shapes: Q (n, n) symmetric PSD; c, lower, upper (n,); A (p, n); b (p,); B (q, n))::

    minimise  1/2 x^T Q x + c^T x + offset
    subject to  A x <= b,   ||B x||_2 <= radius (optional; B = I by default),   lower <= x <= upper

A variable projection x = T^T u (T of shape (k, n)) gives a QP in u in R^k with Hessian T Q T^T,
cost T c and rows A T^T; keeping the ball as ||B T^T u|| <= radius needs only ``ball_map = T^T``
(:mod:`calib.reduce.qp`). Bounds of magnitude >= 1e20 count as infinite
(:mod:`calib.problems.arrays`).

Which points the JL bounds count
--------------------------------
A variable projection must keep the inner products of the rows of A (finite bounds counted as
rows: each is a row e_j^T x <= u_j or -e_j^T x <= -l_j), the linear cost c and the optimum x* with
each other: rows + 2 points (:attr:`QP.jl_points`). The ball is not counted.

Costs: :meth:`QP.validate` is O(nnz) for the shapes and finiteness, plus one symmetric eigenvalue
decomposition, O(n^3), for the convexity check up to :data:`CONVEXITY_CHECK_MAX_VARS` variables;
:meth:`QP.objective` and :meth:`QP.violation` are O(nnz(Q) + nnz(A)).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar, Optional

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.problems.arrays import SYMMETRY_RTOL, Matrix, as_matrix, check_finite, finite_or_inf, is_symmetric, max_abs

#: QPs with at most this many variables get an eigenvalue check of convexity in :meth:`QP.validate`
#: (larger ones are left to the solver, which refuses a nonconvex Hessian at solve time).
CONVEXITY_CHECK_MAX_VARS = 2000


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

    #: how this kind counts n (the JL points) and m (the projected dimension), as ``calib families`` shows it
    COUNTING: ClassVar[str] = ("n = the rows of A plus c and the optimum (rows + 2), the vectors a variable projection "
                               "x = T^T u must keep; m = the number of variables, reduced to k")

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        n = self.c.size
        self.Q = as_matrix(self.Q)
        self.A = np.zeros((0, n)) if self.A is None else as_matrix(self.A)
        self.b = np.zeros(0) if self.b is None else np.asarray(self.b, dtype=float).ravel()
        self.ball_map = None if self.ball_map is None else as_matrix(self.ball_map)
        self.radius = None if self.radius is None else float(self.radius)
        self.lower = finite_or_inf(np.full(n, -np.inf) if self.lower is None else self.lower)
        self.upper = finite_or_inf(np.full(n, np.inf) if self.upper is None else self.upper)

    @property
    def n_vars(self) -> int:
        """Number of variables n (the dimension a variable projection reduces to k)."""
        return self.c.size

    @property
    def n_rows(self) -> int:
        """Number of inequality rows p of A (bounds not counted)."""
        return self.A.shape[0]

    @property
    def has_ball(self) -> bool:
        """Whether the ball constraint ||B x||_2 <= radius is present."""
        return self.radius is not None

    @property
    def n_finite_bounds(self) -> int:
        """Number of finite variable bounds (lower and upper counted apart): each is a row x_j >= l_j or x_j <= u_j."""
        return int(np.isfinite(self.lower).sum() + np.isfinite(self.upper).sum())

    @staticmethod
    def jl_points_for(n_constraint_rows: int) -> int:
        """JL points of a variable projection of a QP with ``n_constraint_rows`` linear inequality
        rows (finite bounds counted as rows): those rows, c and the optimum, rows + 2 (module
        docstring), for counting from a family's sizes before building.

        >>> QP.jl_points_for(30)
        32
        """
        return int(n_constraint_rows) + 2

    @property
    def jl_points(self) -> int:
        """Vectors a variable projection x = T^T u must keep: the p rows of A, the finite bounds as
        rows, c and the optimum x*, p + bounds + 2 (the ball is not counted).

        >>> QP(Q=np.eye(2), c=[1.0, 0.0], A=[[1.0, 1.0]], b=[1.0], lower=[0.0, -np.inf]).jl_points
        4
        """
        return self.jl_points_for(self.n_rows + self.n_finite_bounds)

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
            check_finite(label, self.name, values)
        if np.isnan(self.lower).any() or np.isnan(self.upper).any() or np.any(self.lower > self.upper):
            raise InputError(self.name, "bounds contain NaN or a lower bound above its upper bound", "fix the bounds")
        self._validate_ball()
        if not is_symmetric(self.Q):
            raise InputError(self.name, "Q is not symmetric", "pass the full symmetric Hessian (both triangles)")
        if n <= CONVEXITY_CHECK_MAX_VARS:
            dense = self.Q.toarray() if sp.issparse(self.Q) else self.Q
            if np.linalg.eigvalsh(dense)[0] < -SYMMETRY_RTOL * n * max(1.0, max_abs(dense)):
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
            check_finite("ball_map", self.name, self.ball_map)

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
