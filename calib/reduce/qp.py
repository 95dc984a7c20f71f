"""QP variable projection x = T^T u and its retrieval.

For min 1/2 x^T Q x + c^T x s.t. A x <= b, lower <= x <= upper, ||B x|| <= r and T of shape
(k, n), the reduced QP in u in R^k is::

    min 1/2 u^T (T Q T^T) u + (T c)^T u   s.t.   (A T^T) u <= b,
        (T^T u)_j <= upper_j and -(T^T u)_j <= -lower_j for the finite bounds,   ||(B T^T) u|| <= r

(the ball is kept exactly through ``ball_map = B T^T``; B = I when the original has no map). It is
solved by HiGHS without a ball and by SCS with one (:func:`calib.solvers.qp.solve_qp`). Every
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

import numpy as np
import scipy.sparse as sp

from calib.conic import QP
from calib.metrics import ratio
from calib.problems import Matrix
from calib.projectors.base import Projector
from calib.reduce.base import Context, Handler, Retrieved
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


def feas_error(qp: QP, x: np.ndarray) -> float:
    """Largest violation of the rows, bounds and ball of ``qp`` at x, over max(1, ||b||_inf)."""
    return ratio(qp.violation(x), np.abs(qp.b).max(initial=0.0))


def _lift(context: Context) -> Retrieved:
    return Retrieved(np.asarray(context.reduced.lift @ context.projected.x).ravel())


#: retrieval name -> function(Context) -> Retrieved
RETRIEVALS = {"lift": _lift}


def _solve(qp: QP, solver: dict) -> SolveResult:
    from calib.solvers.qp import solve_qp

    return solve_qp(qp, time_limit=solver["time_limit_s"], options=solver.get("scs" if qp.has_ball else "highs"))


class QPHandler(Handler):
    """Variables projected (a restriction); the one retrieval ``lift`` (x = T^T u)."""

    kind = "qp"
    retrievals = RETRIEVALS
    default_retrieval = "lift"
    bound = "restriction"

    @staticmethod
    def projected_dim(qp: QP) -> int:
        return qp.n_vars

    @staticmethod
    def solve_original(qp: QP, solver: dict) -> SolveResult:
        return _solve(qp, solver)

    @staticmethod
    def reduce(qp: QP, projector: Projector) -> ReducedQP:
        return project_qp(qp, projector)

    @staticmethod
    def solve_reduced(reduced: ReducedQP, solver: dict) -> SolveResult:
        return _solve(reduced.qp, solver)

    @staticmethod
    def point_metrics(qp: QP, x: np.ndarray) -> dict:
        return {"feas_error": feas_error(qp, x)}
