"""Convex QP adapters: HiGHS (linear constraints and bounds) and SCS (also with the ball ||B x|| <= r).

HiGHS takes the Hessian as its LOWER triangle in CSC with ``kTriangular`` format; SCS reads its
UPPER triangle. Each adapter builds its own triangle from the full symmetric Q, so no triangular
matrix is ever shared between the two. :func:`solve_qp` picks HiGHS unless a ball is present.

HiGHS's active-set QP solver adds ``qp_regularization_value`` times the identity to the Hessian
(HiGHS default 1e-7), which moves the returned point by about that amount (measured: 3e-7 on a
6-asset minimum-variance portfolio); :data:`HIGHS_QP_OPTIONS` lowers it to 1e-10.

Both adapters return the inequality multipliers lambda >= 0 of the rows A x <= b in ``dual``
(KKT: Q x + c + A^T lambda + bound terms = 0).
"""

from __future__ import annotations

import time
from typing import Optional

import highspy
import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.problems.qp import QP
from calib.solvers.highs import DEFAULT_OPTIONS, collect_result, new_highs
from calib.solvers.result import SolveResult
from calib.solvers.scs_base import run_scs, upper_csc

#: HiGHS options added for QPs (recorded with every result, overridable).
HIGHS_QP_OPTIONS = {"qp_regularization_value": 1e-10}


def _load_into_highs(h: "highspy.Highs", qp: QP) -> None:
    """Columns (bounds, costs), rows -inf <= A x <= b given row-wise, and the lower-triangle Hessian."""
    n, inf = qp.n_vars, highspy.kHighsInf
    A = sp.csr_array(qp.A)
    A.sum_duplicates()
    hessian = sp.csc_array(sp.tril(sp.csc_array(qp.Q), format="csc"))
    hessian.sum_duplicates()
    statuses = [
        h.addVars(n, np.where(np.isfinite(qp.lower), qp.lower, -inf), np.where(np.isfinite(qp.upper), qp.upper, inf)),
        h.changeColsCost(n, np.arange(n, dtype=np.int32), qp.c),
        h.addRows(qp.n_rows, np.full(qp.n_rows, -inf), qp.b, A.nnz, A.indptr[:-1].astype(np.int32), A.indices.astype(np.int32), A.data),
        h.changeObjectiveOffset(float(qp.offset)),
        h.passHessian(n, hessian.nnz, int(highspy.HessianFormat.kTriangular), hessian.indptr.astype(np.int32),
                      hessian.indices.astype(np.int32), hessian.data),
    ]
    if highspy.HighsStatus.kError in statuses:
        raise ValueError(f"HiGHS refused the QP {qp.name!r} while loading it")


def solve_qp_highs(qp: QP, time_limit: float = 60.0, options: Optional[dict] = None) -> SolveResult:
    """Solve a QP without ball with HiGHS (its QP solver; one thread, quiet).

    ``time_limit`` is in seconds; ``options`` are HiGHS options added to
    :data:`calib.solvers.highs.DEFAULT_OPTIONS` and :data:`HIGHS_QP_OPTIONS`. Raises
    :class:`InputError` when the QP has a ball (use :func:`solve_qp_scs`). Never raises for
    infeasible or unbounded problems.
    """
    if qp.has_ball:
        raise InputError(qp.name, "HiGHS cannot take the ball constraint ||B x|| <= r", "solve it with SCS (solve_qp_scs or solve_qp)")
    used = {**HIGHS_QP_OPTIONS, "time_limit": float(time_limit), **(options or {})}
    h = new_highs(used)
    _load_into_highs(h, qp)
    start = time.perf_counter()
    h.run()
    seconds = time.perf_counter() - start
    # HiGHS's row duals of A x <= b are <= 0 at a minimum; lambda >= 0 is their negative
    return collect_result(h, seconds, {**DEFAULT_OPTIONS, **used}, "highs-qp", dual_sign=-1.0)


def scs_qp_data(qp: QP) -> tuple[dict, dict]:
    """SCS ``data`` and ``cone`` for a QP; rows: A x <= b, -x <= -lower, x <= upper (finite bounds
    only) in the nonnegative cone, then (r, B x) in the second-order cone when a ball is present."""
    n = qp.n_vars
    identity = sp.identity(n, format="csr")
    has_lower, has_upper = np.flatnonzero(np.isfinite(qp.lower)), np.flatnonzero(np.isfinite(qp.upper))
    blocks = [sp.csr_array(qp.A), -identity[has_lower], identity[has_upper]]
    rhs = [qp.b, -qp.lower[has_lower], qp.upper[has_upper]]
    cone: dict = {"l": qp.n_rows + has_lower.size + has_upper.size}
    if qp.has_ball:
        B = identity if qp.ball_map is None else sp.csr_array(qp.ball_map)
        blocks += [sp.csr_array((1, n)), -B]
        rhs += [np.array([qp.radius]), np.zeros(B.shape[0])]
        cone["q"] = [1 + B.shape[0]]
    A = sp.vstack(blocks, format="csc")
    return {"P": upper_csc(qp.Q), "A": A, "b": np.concatenate(rhs), "c": qp.c}, cone


def solve_qp_scs(qp: QP, time_limit: float = 60.0, settings: Optional[dict] = None) -> SolveResult:
    """Solve a QP (with or without ball) with SCS; arguments as :func:`calib.solvers.scs_sdp.solve_sdp`.

    ``objective`` includes the offset; ``dual`` holds the multipliers of the rows A x <= b.
    """
    data, cone = scs_qp_data(qp)
    answer = run_scs(data, cone, time_limit, settings)
    result = answer.result
    if result.status == "optimal":
        result.x = answer.x.copy()
        result.dual = answer.y[:qp.n_rows].copy()
        result.objective += float(qp.offset)
    return result


def solve_qp(qp: QP, time_limit: float = 60.0, options: Optional[dict] = None) -> SolveResult:
    """HiGHS for a QP without ball, SCS with one; ``options`` go to the chosen solver."""
    solve = solve_qp_scs if qp.has_ball else solve_qp_highs
    return solve(qp, time_limit, options)
