"""QP variable projection x = T^T u and its retrieval.

For min 1/2 x^T Q x + c^T x s.t. A x <= b, lower <= x <= upper, ||B x|| <= r and T of shape
(k, n), the reduced QP in u in R^k is::

    min 1/2 u^T (T Q T^T) u + (T c)^T u   s.t.   (A T^T) u <= b,
        (T^T u)_j <= upper_j and -(T^T u)_j <= -lower_j for the finite bounds,   ||(B T^T) u|| <= r

(the ball is kept exactly through ``ball_map = B T^T``; B = I when the original has no map). Both
problems are solved by the methods of :mod:`calib.solvers.methods`: ``highs`` (without a ball) or
``scs``; ``auto`` picks HiGHS without a ball and SCS with one. Every
feasible u gives a feasible x = T^T u with the same objective value, so the reduced problem is a
restriction: its optimum is an upper bound on the original optimum, and a feasible original may
become infeasible (the one-sided error of a restriction). The retrieval ``lift`` is x = T^T u*:
feasible by construction (verified through feas_error) with objective ratio f(x) / f(x*).

Reference: M. Pilanci and M. J. Wainwright, "Randomized sketches of convex programs with sharp
guarantees", IEEE Trans. Information Theory 61(9):5096–5115, 2015 (sketching the variables of a
convex program).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
import scipy.sparse as sp

from calib.conic import QP
from calib.metrics import relative, scale
from calib.problems import Matrix
from calib.projectors.base import Projector
from calib.reduce.base import Context, Handler, Retrieved, linear_size, relative_distance
from calib.solvers.result import SolveResult


@dataclass
class ReducedQP:
    """The reduced QP in u and the lift T^T (shape (n, k)) that maps u back to x."""

    qp: QP
    lift: Matrix


def _dense(X) -> np.ndarray:
    return X.toarray() if sp.issparse(X) else np.asarray(X)


def project_qp(qp: QP, projector: Projector) -> ReducedQP:
    """The reduced QP of the module docstring for a projector T of shape (k, n)."""
    n = qp.n_vars
    T = projector.apply(sp.identity(n, format="csr"))
    lift = T.T
    Q = _dense(T @ (qp.Q @ lift))
    upper, lower = np.flatnonzero(np.isfinite(qp.upper)), np.flatnonzero(np.isfinite(qp.lower))
    rows = [_dense(qp.A @ lift), _dense(lift[upper]), -_dense(lift[lower])]
    ball_map = None if not qp.has_ball else (lift if qp.ball_map is None else qp.ball_map @ lift)
    reduced = QP(Q=(Q + Q.T) / 2.0, c=np.asarray(T @ qp.c).ravel(), A=np.vstack(rows),
                 b=np.concatenate([qp.b, qp.upper[upper], -qp.lower[lower]]), radius=qp.radius, ball_map=ball_map,
                 offset=qp.offset, name=f"{qp.name}|{projector.name}-k{projector.k}")
    return ReducedQP(reduced, lift)


def feasibility_scale(qp: QP, x_ref: np.ndarray) -> float:
    """max(||b||_inf, largest finite bound, radius, SCALE_FLOOR * || |A| |x_ref| ||_inf, SCALE_FLOOR * ||x_ref||_inf)."""
    bounds = np.concatenate([qp.lower[np.isfinite(qp.lower)], qp.upper[np.isfinite(qp.upper)]])
    rhs = max(np.abs(qp.b).max(initial=0.0), np.abs(bounds).max(initial=0.0), qp.radius or 0.0)
    terms = max(np.abs(np.asarray(abs(qp.A) @ np.abs(x_ref))).max(initial=0.0), np.abs(x_ref).max(initial=0.0))
    return scale(rhs, terms)


def feas_error(qp: QP, x: np.ndarray, x_ref: np.ndarray) -> float:
    """Largest violation of the rows, bounds and ball of ``qp`` at x over :func:`feasibility_scale`."""
    return relative(qp.violation(x), feasibility_scale(qp, x_ref))


def _lift(context: Context) -> Retrieved:
    return Retrieved(np.asarray(context.reduced.lift @ context.projected.x).ravel())


#: retrieval name -> function(Context) -> Retrieved
RETRIEVALS = {"lift": _lift}


class QPHandler(Handler):
    """Variables projected (a restriction); the one retrieval ``lift`` (x = T^T u)."""

    kind = "qp"
    retrievals = RETRIEVALS
    default_retrieval = "lift"
    bound = "restriction"

    @staticmethod
    def projected_dim(qp: QP) -> int:
        """n, the variables that x = T^T y, T of shape (k, n), restricts to a k-dimensional subspace."""
        return qp.n_vars

    @staticmethod
    def solve_with(qp: QP, method: str, solver: dict, need_basis: bool) -> Optional[SolveResult]:
        """``highs`` (None with a ball: it does not apply) or ``scs``, with the spec's option table of that solver."""
        from calib.solvers.qp import solve_qp_highs, solve_qp_scs

        if method == "highs":
            return None if qp.has_ball else solve_qp_highs(qp, solver["time_limit_s"], solver.get("highs"))
        return solve_qp_scs(qp, solver["time_limit_s"], solver.get("scs"))

    @staticmethod
    def auto_method(qp: QP) -> str:
        """``scs`` with a ball constraint (HiGHS solves no conic QP), else ``highs``."""
        return "scs" if qp.has_ball else "highs"

    @staticmethod
    def reduce(qp: QP, projector: Projector) -> ReducedQP:
        """The QP restricted to x = T^T y (:func:`project_qp`)."""
        return project_qp(qp, projector)

    @staticmethod
    def reduced_problem(reduced: ReducedQP) -> QP:
        """The k-variable QP inside the reduced one (T is kept beside it to map y back)."""
        return reduced.qp

    @staticmethod
    def objective_size(qp: QP, x: np.ndarray) -> float:
        """1/2 x^T Q x + |c|^T |x| + |offset| (Q is PSD, so its term is already >= 0)."""
        return 0.5 * abs(float(x @ np.asarray(qp.Q @ x).ravel())) + linear_size(qp.c, x, qp.offset)

    @staticmethod
    def point_metrics(qp: QP, x: np.ndarray, x_ref: np.ndarray) -> dict:
        """``feas_error`` of the point x, shape (n,), at the scale of ``x_ref`` (:func:`feas_error`)."""
        return {"feas_error": feas_error(qp, x, x_ref)}

    @staticmethod
    def decision_metrics(qp: QP, x: np.ndarray, x_orig: np.ndarray) -> dict:
        """``decision_error``: ||x - x*|| / ||x*|| (a portfolio's weights against the optimal ones)."""
        return {"decision_error": relative_distance(x, x_orig)}
