"""LP row projection and retrieval.

The projected LP of min c^T x, Ax = b, x >= 0 under T (k x m) is min c^T x, TAx = Tb, x >= 0:
every feasible x of the original is feasible for it (a relaxation), so its optimum is a lower
bound. Retrieval maps a projected solution back to a point of the original space.

Reference for the projection and the basis least-squares retrieval: K. K. Vu, P.-L. Poirion and
L. Liberti, "Random projections for linear programming", Mathematics of Operations Research
43(4):1051–1071, 2018.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from calib.problems import StandardLP
from calib.projectors.base import Projector
from calib.solvers.result import SolveResult

#: dense least squares up to this many matrix entries; LSQR beyond
_DENSE_LSTSQ_LIMIT = 20_000_000


def project_lp(lp: StandardLP, projector: Projector) -> StandardLP:
    """min c^T x, (TA) x = Tb, x >= 0 for a projector T of shape (k, m)."""
    TA = projector.apply(lp.A)
    Tb = projector.apply(lp.b)
    return StandardLP(c=lp.c, A=TA, b=Tb, offset=lp.offset, name=f"{lp.name}|{projector.name}-k{projector.k}")


def basis_lstsq(lp: StandardLP, projected: SolveResult) -> np.ndarray:
    """Least-squares solve of A_B x_B ~= b on the columns B basic at the projected optimum.

    Returns x of shape (n,) with zeros off B. This is the retrieval of Vu, Poirion and Liberti
    (2018): x_B = A_B^+ b. When the projected solve returned no basis, its support is used.
    """
    n = lp.n_cols
    columns = projected.basis if projected.basis is not None else np.flatnonzero(projected.x > 0)
    x = np.zeros(n)
    if columns.size == 0:
        return x
    A_B = lp.A[:, columns]
    if sp.issparse(A_B) and A_B.shape[0] * A_B.shape[1] > _DENSE_LSTSQ_LIMIT:
        x[columns] = spla.lsqr(A_B, lp.b, atol=1e-12, btol=1e-12, iter_lim=10 * columns.size)[0]
    else:
        dense = A_B.toarray() if sp.issparse(A_B) else A_B
        x[columns] = np.linalg.lstsq(dense, lp.b, rcond=None)[0]
    return x


#: retrieval name -> function(original lp, projected result) -> x of shape (n,)
RETRIEVALS = {
    "basis-lstsq": basis_lstsq,
}


def _sign_violation(x: np.ndarray) -> float:
    return float(np.linalg.norm(np.minimum(x, 0.0)) / max(1.0, np.linalg.norm(x)))


def _feas_error(lp: StandardLP, x: np.ndarray) -> float:
    return float(np.linalg.norm(lp.residual(x)) / max(1.0, np.linalg.norm(lp.b)))


class LPHandler:
    """Runs the LP part of a trial: original solve, projection, projected solve, retrievals."""

    kind = "lp"
    retrievals = RETRIEVALS

    @staticmethod
    def projected_dim(lp: StandardLP) -> int:
        return lp.n_rows

    @staticmethod
    def solve_original(lp: StandardLP, solver: dict) -> SolveResult:
        from calib.solvers.highs import solve_lp

        return solve_lp(lp, time_limit=solver["time_limit_s"], options=solver.get("highs"))

    @staticmethod
    def trial_records(lp: StandardLP, original: SolveResult, projector: Projector,
                      retrievals: list[str], solver: dict) -> list[dict]:
        """One metrics record per retrieval method, all sharing the same projected solve."""
        import time

        from calib.metrics import record, rel_diff
        from calib.solvers.highs import solve_lp

        reduced = project_lp(lp, projector)
        t_sketch = projector.draw_seconds + projector.apply_seconds
        projected = solve_lp(reduced, time_limit=solver["time_limit_s"], options=solver.get("highs"))
        common = dict(
            orig_status=original.status, orig_objective=original.objective,
            orig_feasible=original.feasible, proj_status=projected.status,
            proj_message=projected.solver_message, proj_objective=projected.objective,
            proj_feasible=projected.feasible, proj_iterations=projected.iterations,
            t_sketch=t_sketch, t_solve_proj=projected.seconds,
        )
        if projected.ok and original.ok:
            common["proj_gap"] = (original.objective - projected.objective) / max(1.0, abs(original.objective))
        rows = []
        for name in retrievals:
            values = dict(common)
            if projected.ok:
                start = time.perf_counter()
                x = RETRIEVALS[name](lp, projected)
                values["t_retrieve"] = time.perf_counter() - start
                values["feas_error"] = _feas_error(lp, x)
                values["sign_violation"] = _sign_violation(x)
                if original.ok:
                    values["obj_error"] = rel_diff(lp.objective(x), original.objective)
            rows.append(record(**values))
        return rows
