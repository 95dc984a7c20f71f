"""Least-norm corrections onto an affine set {x : A x = b}, and alternating projections with a cone.

The orthogonal projection of x onto {A x = b} is x - A^+ (A x - b), with A^+ the Moore–Penrose
pseudoinverse: the smallest correction (in the Euclidean norm) that makes the equalities hold
(or, when b is not in the range of A, that minimises ||A x - b||). For an SDP written in svec
coordinates the Euclidean norm is the Frobenius norm of the matrix, so the same code gives the
least-Frobenius-norm correction (see :mod:`calib.conic`).

Two ways to apply A^+, chosen by size: a dense SVD computed once per :class:`AffineSet` (exact,
rank-revealing, O(m n min(m, n)) to build and O(m n) per projection) when A has at most
:data:`DENSE_ENTRIES_LIMIT` entries, and LSQR otherwise (started from zero it converges to the
minimum-norm least-squares solution; C. C. Paige and M. A. Saunders, "LSQR: An algorithm for sparse
linear equations and sparse least squares", ACM TOMS 8(1):43–71, 1982).

The factorisation depends on the problem alone, not on the trial: :func:`affine_set` builds it once
per problem object (a worker keeps its built instances, so once per instance and worker) and keeps
it while the problem lives; its build time, :attr:`AffineSet.seconds`, is reported on its own
(``t_factor``), apart from the retrieval that uses it.

Alternating projections between a closed subspace-translate and a closed convex cone converge to a
point of their intersection when it is non-empty (L. M. Bregman, "The method of successive
projection for finding a common point of convex sets", Soviet Math. Dokl. 6:688–692, 1965).
"""

from __future__ import annotations

import time
import weakref
from dataclasses import dataclass
from typing import Any, Callable, Optional

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

#: A (m x n) with at most this many entries is handled densely (SVD); larger ones with LSQR.
DENSE_ENTRIES_LIMIT = 4_000_000
#: LSQR tolerances (relative residuals) and iteration cap as a multiple of min(m, n).
LSQR_TOL, LSQR_ITER_FACTOR = 1e-12, 10


def least_squares(A: np.ndarray | sp.spmatrix | sp.sparray, b: np.ndarray) -> np.ndarray:
    """Minimum-norm least-squares solution of A x ~= b (dense or sparse A of shape (m, n)), shape (n,).

    >>> least_squares(np.array([[1.0, 1.0]]), np.array([2.0])).round(12).tolist()
    [1.0, 1.0]
    """
    m, n = A.shape
    if sp.issparse(A) and m * n > DENSE_ENTRIES_LIMIT:
        return spla.lsqr(A, b, atol=LSQR_TOL, btol=LSQR_TOL, iter_lim=LSQR_ITER_FACTOR * min(m, n))[0]
    dense = A.toarray() if sp.issparse(A) else np.asarray(A)
    return np.linalg.lstsq(dense, b, rcond=None)[0]


class AffineSet:
    """The affine set {x : A x = b} with its orthogonal projection (A of shape (m, n), b of shape (m,)).

    >>> S = AffineSet(np.array([[1.0, 1.0]]), np.array([2.0]))
    >>> S.project(np.array([3.0, 0.0])).round(12).tolist()
    [2.5, -0.5]
    """

    def __init__(self, A, b: np.ndarray):
        start = time.perf_counter()
        self.A = A
        self.b = np.asarray(b, dtype=float)
        m, n = A.shape
        self._sparse = sp.issparse(A) and m * n > DENSE_ENTRIES_LIMIT
        if not self._sparse:
            dense = A.toarray() if sp.issparse(A) else np.asarray(A, dtype=float)
            U, s, Vt = np.linalg.svd(dense, full_matrices=False)
            # numpy.linalg.lstsq's default cut-off: singular values below max(m, n) * eps * s_max
            keep = s > max(m, n) * np.finfo(float).eps * (s[0] if s.size else 0.0)
            self._U, self._inv_s, self._Vt = U[:, keep], 1.0 / s[keep], Vt[keep]
        #: wall seconds the factorisation took (0 for LSQR, which factors nothing)
        self.seconds = time.perf_counter() - start

    def residual(self, x: np.ndarray) -> np.ndarray:
        """A x - b, shape (m,)."""
        return np.asarray(self.A @ x).ravel() - self.b

    def correction(self, r: np.ndarray) -> np.ndarray:
        """A^+ r, the least-norm d with A d = r (least squares when r is not in the range)."""
        if self._sparse:
            return least_squares(self.A, r)
        return self._Vt.T @ (self._inv_s * (self._U.T @ r))

    def project(self, x: np.ndarray) -> np.ndarray:
        """The nearest point of the set to x (Euclidean norm)."""
        return x - self.correction(self.residual(x))


#: id(problem) -> its AffineSet; an entry leaves with its problem (weakref.finalize)
_FACTORED: dict[int, AffineSet] = {}


def affine_set(problem: Any) -> tuple[AffineSet, float]:
    """The affine set {x : problem.A x = problem.b}, factored on first use and reused while ``problem``
    lives, with the seconds this call spent building it (0.0 when it was reused).

    >>> class Problem:
    ...     A, b = np.eye(2), np.ones(2)
    >>> problem = Problem()
    >>> first, spent = affine_set(problem)
    >>> again, spent_again = affine_set(problem)
    >>> again is first, spent_again
    (True, 0.0)
    """
    key = id(problem)
    found = _FACTORED.get(key)
    if found is not None:
        return found, 0.0
    start = time.perf_counter()
    found = _FACTORED[key] = AffineSet(problem.A, problem.b)
    weakref.finalize(problem, _FACTORED.pop, key, None)
    return found, time.perf_counter() - start


@dataclass
class Alternation:
    """Result of :func:`alternate`: the last affine iterate, the rounds run and why it stopped."""

    x: np.ndarray
    rounds: int
    stop: str  # "converged", "stalled", "max_rounds" or "time"


#: Default stopping rule of :func:`alternate` (see there).
CONE_TOL, STALL_TOL, MAX_ROUNDS = 1e-9, 1e-13, 500


def alternate(x0: np.ndarray, affine: AffineSet, cone_project: Callable[[np.ndarray], np.ndarray],
              cone_violation: Callable[[np.ndarray], float], tol: float = CONE_TOL, max_rounds: int = MAX_ROUNDS,
              max_seconds: Optional[float] = None) -> Alternation:
    """Least-norm correction of x0 onto the affine set, then alternating projections with a cone.

    x_0 = P_affine(x0); round t: x_{t+1} = P_affine(P_cone(x_t)). Stopping rule, checked before
    every round: stop ("converged") when cone_violation(x_t) <= tol; ("stalled") when the last round
    moved x by at most STALL_TOL * max(1, ||x||); ("max_rounds") after ``max_rounds`` rounds;
    ("time") once ``max_seconds`` of wall time have passed. The returned point is always an affine
    iterate, so it satisfies A x = b up to round-off and carries the remaining cone violation.

    >>> S = AffineSet(np.array([[1.0, 0.0]]), np.array([1.0]))   # {x : x_0 = 1}
    >>> out = alternate(np.array([3.0, -2.0]), S, lambda v: np.maximum(v, 0.0), lambda v: float(-min(v.min(), 0.0)))
    >>> out.x.round(12).tolist(), out.rounds, out.stop
    ([1.0, 0.0], 1, 'converged')
    """
    start = time.perf_counter()
    x = affine.project(np.asarray(x0, dtype=float))
    rounds = 0
    while True:
        if cone_violation(x) <= tol:
            return Alternation(x, rounds, "converged")
        if rounds >= max_rounds:
            return Alternation(x, rounds, "max_rounds")
        if max_seconds is not None and time.perf_counter() - start >= max_seconds:
            return Alternation(x, rounds, "time")
        previous = x
        x = affine.project(cone_project(x))
        rounds += 1
        if np.linalg.norm(x - previous) <= STALL_TOL * max(1.0, np.linalg.norm(x)):
            return Alternation(x, rounds, "stalled")
