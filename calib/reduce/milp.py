"""MILP row projection, and the completion of the projected decision in the original.

The projected model of min c^T z, A z = b, 0 <= z <= upper, z_j integer (j in I), under T (k x m),
is min c^T z, (TA) z = Tb with the same bounds and integrality: every feasible z of the original
is feasible for it (a relaxation), so its optimum is a lower bound and an infeasible projection
certifies an infeasible original. The slacks of the original are singleton columns; in T A they
become the dense columns of T (with the slack's sign), and once k is well below m those columns
span R^k positively: for m >= 2k Gaussian columns that is the rule rather than the exception
(J. G. Wendel, "A problem in geometric probability", Math. Scand. 11:109–111, 1962: m symmetric
random vectors in R^k all lie in one half-space with probability 2^{1-m} sum_{i<k} C(m-1, i),
1/2 at m = 2k). Then every decision can be matched by some slacks >= 0, the projected rows hold
for any x within its bounds, and the projected optimum is the best x of the bounds alone.

Retrieval ``completion`` (:func:`complete_milp`): keep the projected decision (integers rounded,
:func:`calib.milp.rounded_decision`), recompute every slack exactly from its own original row (the
closed form per row of :mod:`calib.reduce.completion`, the LP completion), and judge the completed point in the original: its
feasibility error is the residual of the rows that cannot be completed (``feas_error`` on the
scale of :mod:`calib.metrics`, ``rows_violated`` their share), its objective against the original
optimum (``obj_error``, ``obj_ratio``). The fair baseline is the original solved by HiGHS MIP
(:mod:`calib.solvers.milp`).
"""

from __future__ import annotations

import numpy as np

from calib.milp import StandardMILP, rounded_decision, violated_rows
from calib.reduce.base import Context, Retrieved, RowProjectionHandler, linear_size, relative_residual
from calib.reduce.completion import complete
from calib.solvers.milp import solve_milp
from calib.solvers.result import SolveResult


def complete_milp(problem: StandardMILP, z: np.ndarray) -> np.ndarray:
    """The decision of ``z`` (integers rounded) with every slack recomputed from its own row, shape (N,).

    >>> from calib.milp import from_inequalities
    >>> p = from_inequalities([-1.0, -1.0], [[1.0, 1.0], [1.0, 0.0]], [1.0, 2.0], "<=", [1.0, 1.0], [True, True])
    >>> complete_milp(p, np.array([1.0, 1.0, 7.0, 7.0])).tolist()   # row 0 cannot be completed: 1 - 2 < 0
    [1.0, 1.0, 0.0, 1.0]
    """
    return complete(problem, rounded_decision(problem, z), problem.decision).x


def _completion(context: Context) -> Retrieved:
    return Retrieved(complete_milp(context.problem, context.projected.x))


class MILPHandler(RowProjectionHandler):
    """Rows projected (A z = b -> TA z = Tb), bounds and integrality kept, the decision completed."""

    kind = "milp"
    retrievals = {"completion": _completion}
    default_retrieval = "completion"

    @staticmethod
    def solve_with(problem: StandardMILP, method: str, solver: dict, need_basis: bool) -> SolveResult:
        """HiGHS MIP (method ``highs``) within the spec's time limit, with its ``highs`` options."""
        return solve_milp(problem, float(solver.get("time_limit_s", 60.0)), solver.get("highs"))

    @staticmethod
    def objective_size(problem: StandardMILP, z: np.ndarray) -> float:
        """|c|^T |z| + |offset| at the point z, shape (n,) (:func:`calib.reduce.base.linear_size`)."""
        return linear_size(problem.c, z, problem.offset)

    @classmethod
    def point_metrics(cls, problem: StandardMILP, z: np.ndarray, z_ref: np.ndarray) -> dict:
        """``feas_error`` of z (relative residual at the scale of ``z_ref``) and ``rows_violated``
        (rows of A z = b missed beyond the tolerance of :func:`calib.milp.violated_rows`)."""
        return {"feas_error": relative_residual(problem, z, z_ref), "rows_violated": violated_rows(problem, z)}
