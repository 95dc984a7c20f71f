"""LP row projection and four retrievals compared on the same projected solve.

The projected LP of min c^T x, Ax = b, x >= 0 under T (k x m) is min c^T x, TAx = Tb, x >= 0:
every feasible x of the original is feasible for it (a relaxation), so its optimum is a lower
bound, and an infeasible projection certifies an infeasible original (the error is one-sided).
Retrieval maps the projected solution x' (with its basis B and duals y') back to the original:

``basis-lstsq``
    x_B = A_B^+ b on the columns basic at the projected optimum, zero elsewhere (Vu, Poirion and
    Liberti 2018). Equalities hold only approximately and x_B may be negative.
``alternating``
    The improved retrieval of Liberti, Manca and Poirion: the least-norm correction
    x' + A^+(b - A x') onto {Ax = b}, then alternating projections between {Ax = b} and x >= 0,
    stopped by the rule of :func:`calib.reduce.affine.alternate` (sign violation <= 1e-9, a stalled
    round, 500 rounds or the solver time limit). The point returned satisfies Ax = b.
``restricted-repair``
    Solve the original LP on the columns basic at the projected optimum; while that restricted LP
    is not solved to optimality (infeasible, or a verdict HiGHS could not reach), double the
    column set by adding the columns with the smallest projected reduced costs c_j - (TA)_j^T y'
    (ties by larger x'_j, then by index). Feasible for the original by construction; records the
    widening rounds and the share of columns finally used (``columns_share``). When it had to take
    all columns it solved the original itself and is marked ``exact``. If even all columns fail
    (an infeasible original), the ``basis-lstsq`` point is returned.
``warm-start``
    Solve the original LP with HiGHS simplex starting from the projected basis (completed with row
    logicals, see :func:`warm_basis`); records the simplex iterations and seconds saved against the
    cold simplex solve of the fair baseline. Its point is the original optimum (marked ``exact``);
    if the warm solve fails, x' itself.

``completion``
    Keep the decision columns of x' (the user's variables, :class:`calib.problems.DecisionMap`) and
    solve for the completion columns exactly (:mod:`calib.reduce.completion`: a closed form per row
    when each occurs in one row, else the restricted LP). The point a user would take from the
    projected solve, judged in the original; a row it cannot satisfy keeps its residual
    (``completion_shortfall``), never repaired by solving the original.

``exact`` retrievals return the original's own optimum: their errors are zero by construction, so
the analysis judges them on time saved alone (:mod:`calib.verdicts.success`).

The projected LP is solved by the method of :mod:`calib.solvers.methods` (``auto``: interior
point on a large dense projected matrix); ``basis-lstsq``, ``restricted-repair`` and ``warm-start``
read the projected basis, so with them interior point runs crossover.

References: K. K. Vu, P.-L. Poirion and L. Liberti, "Random projections for linear programming",
Mathematics of Operations Research 43(4):1051–1071, 2018. L. Liberti, B. Manca and P.-L. Poirion,
"Random projections for linear programming: an improved retrieval phase", ACM Journal of
Experimental Algorithmics 28, 2023.
"""

from __future__ import annotations

import highspy
import numpy as np
import scipy.linalg
import scipy.sparse as sp

from calib.problems import StandardLP, decision_of
from calib.projectors.base import Projector
from calib.reduce.affine import affine_set, alternate, least_squares
from calib.reduce.base import Context, Retrieved, RowProjectionHandler, linear_size, relative_distance
from calib.reduce.completion import complete, unmet_share
from calib.solvers.result import SolveResult


def project_lp(lp: StandardLP, projector: Projector) -> StandardLP:
    """min c^T x, (TA) x = Tb, x >= 0 for a projector T of shape (k, m)."""
    return LPHandler.reduce(lp, projector)


def _basic_columns(projected: SolveResult) -> np.ndarray:
    """Columns basic at the projected optimum (its support when the solve returned no basis)."""
    return projected.basis if projected.basis is not None else np.flatnonzero(projected.x > 0)


def basis_lstsq(lp: StandardLP, projected: SolveResult) -> np.ndarray:
    """Least-squares solve of A_B x_B ~= b on the columns B basic at the projected optimum.

    Returns x of shape (n,) with zeros off B. This is the retrieval of Vu, Poirion and Liberti
    (2018): x_B = A_B^+ b. When the projected solve returned no basis, its support is used.
    """
    columns = _basic_columns(projected)
    x = np.zeros(lp.n_cols)
    if columns.size:
        x[columns] = least_squares(lp.A[:, columns], lp.b)
    return x


def sign_violation(x: np.ndarray) -> float:
    """||min(x, 0)|| / ||x|| (0 at x = 0): the share of x outside the nonnegative orthant.

    >>> sign_violation(np.array([3.0, -4.0])), sign_violation(np.array([0.003, -0.004]))
    (0.8, 0.8)
    """
    negative = np.linalg.norm(np.minimum(x, 0.0))
    return 0.0 if negative == 0.0 else float(negative / np.linalg.norm(x))


def _highs_options(context: Context) -> dict:
    return context.solver.get("highs") or {}


def _retrieve_lstsq(context: Context) -> Retrieved:
    return Retrieved(basis_lstsq(context.problem, context.projected))


def _retrieve_alternating(context: Context) -> Retrieved:
    affine, building = affine_set(context.problem)
    out = alternate(context.projected.x, affine, lambda x: np.maximum(x, 0.0), sign_violation,
                    max_seconds=context.time_limit)
    return Retrieved(out.x, {"retrieval_iterations": out.rounds, "t_factor": affine.seconds}, building)


def _retrieve_completion(context: Context) -> Retrieved:
    lp = context.problem
    done = complete(lp, context.projected.x, decision_of(lp), time_limit=context.time_limit,
                    options=_highs_options(context))
    extra = {"completion_shortfall": unmet_share(lp, done.x)}
    if done.method == "lp":
        extra["retrieval_iterations"] = done.iterations
    return Retrieved(done.x, extra)


def widening_order(reduced: StandardLP, projected: SolveResult) -> np.ndarray:
    """Columns by increasing projected reduced cost c_j - (TA)_j^T y', then decreasing x'_j, then index."""
    reduced_cost = reduced.c - np.asarray(reduced.A.T @ projected.dual).ravel()
    return np.lexsort((np.arange(reduced.n_cols), -projected.x, reduced_cost))


def _retrieve_restricted(context: Context) -> Retrieved:
    from calib.solvers.highs import solve_lp

    lp = context.problem
    order = widening_order(context.reduced, context.projected)
    chosen = np.zeros(lp.n_cols, dtype=bool)
    chosen[_basic_columns(context.projected)] = True
    if not chosen.any():
        chosen[order[0]] = True
    rounds = iterations = 0
    while True:
        columns = np.flatnonzero(chosen)
        restricted = StandardLP(c=lp.c[columns], A=lp.A[:, columns], b=lp.b, offset=lp.offset, name=f"{lp.name}|restricted")
        result = solve_lp(restricted, time_limit=context.time_limit, options=_highs_options(context))
        iterations += result.iterations
        if result.ok:
            x = np.zeros(lp.n_cols)
            x[columns] = result.x
            break
        if chosen.all():
            x = basis_lstsq(lp, context.projected)
            break
        missing = order[~chosen[order]]
        chosen[missing[:columns.size]] = True
        rounds += 1
    used = int(chosen.sum())
    return Retrieved(x, {"retrieval_iterations": iterations, "widening_rounds": rounds,
                         "columns_share": used / lp.n_cols, "exact": bool(result.ok and used == lp.n_cols)})


def warm_basis(lp: StandardLP, columns: np.ndarray) -> "highspy.HighsBasis":
    """A HiGHS basis of the original LP from the projected basic columns B (|B| <= m).

    B stays basic (its columns are independent: TA_B has full column rank, hence so has A_B).
    The remaining m - |B| basic variables are row logicals: a QR factorisation of A_B^T with column
    pivoting picks |B| rows on which A_B is well conditioned; every other row gets a basic logical.
    All other columns are nonbasic at their bound 0 and the picked rows nonbasic at their value b_i.
    """
    m = lp.n_rows
    A_B = lp.A[:, columns]
    dense = A_B.toarray() if sp.issparse(A_B) else np.asarray(A_B)
    covered = scipy.linalg.qr(dense.T, mode="r", pivoting=True)[1][:columns.size] if columns.size else np.zeros(0, int)
    status = highspy.HighsBasisStatus
    col_status = [status.kLower] * lp.n_cols
    for j in columns:
        col_status[int(j)] = status.kBasic
    row_status = [status.kBasic] * m
    for i in covered:
        row_status[int(i)] = status.kLower
    basis = highspy.HighsBasis()
    basis.col_status = col_status
    basis.row_status = row_status
    basis.valid = True
    return basis


def _retrieve_warm(context: Context) -> Retrieved:
    from calib.solvers.highs import solve_lp

    lp = context.problem
    basis = warm_basis(lp, _basic_columns(context.projected))
    result = solve_lp(lp, time_limit=context.time_limit, options=_highs_options(context), warm_basis=basis)
    x = result.x if result.ok else context.projected.x
    cold_iterations = context.baseline.get("simplex_iterations")
    cold_seconds = context.baseline.get("simplex_seconds")
    return Retrieved(x, {"retrieval_iterations": result.iterations, "exact": result.ok,
                         "iterations_saved": None if cold_iterations is None else cold_iterations - result.iterations,
                         "warm_seconds_saved": None if cold_seconds is None else cold_seconds - result.seconds})


#: retrieval name -> function(Context) -> Retrieved (the point and its own metric fields)
RETRIEVALS = {
    "completion": _retrieve_completion,
    "basis-lstsq": _retrieve_lstsq,
    "alternating": _retrieve_alternating,
    "restricted-repair": _retrieve_restricted,
    "warm-start": _retrieve_warm,
}


class LPHandler(RowProjectionHandler):
    """Rows projected (a relaxation); retrievals of :data:`RETRIEVALS`, default ``completion``."""

    kind = "lp"
    retrievals = RETRIEVALS
    default_retrieval = "completion"
    cone_violation = staticmethod(sign_violation)
    basis_retrievals = frozenset({"basis-lstsq", "restricted-repair", "warm-start"})

    @staticmethod
    def solve_with(lp: StandardLP, method: str, solver: dict, need_basis: bool) -> SolveResult:
        """HiGHS by ``method`` (simplex or interior point) within the spec's time limit (seconds), with
        its ``highs`` options; ``need_basis``: return the optimal basis (the basis retrievals read it)."""
        from calib.solvers.highs import solve_lp

        return solve_lp(lp, time_limit=solver["time_limit_s"], options=solver.get("highs"), method=method,
                        need_basis=need_basis)

    @staticmethod
    def auto_method(lp: StandardLP) -> str:
        """The HiGHS method :func:`calib.solvers.methods.auto_lp_method` picks from the shape of A."""
        from calib.solvers.methods import auto_lp_method

        return auto_lp_method(lp.A)

    @staticmethod
    def objective_size(lp: StandardLP, x: np.ndarray) -> float:
        """|c|^T |x| + |offset| at the point x, shape (n,)."""
        return linear_size(lp.c, x, lp.offset)

    @staticmethod
    def decision_metrics(lp: StandardLP, x: np.ndarray, x_orig: np.ndarray) -> dict:
        """``decision_error``: ||d(x) - d(x*)|| / ||d(x*)|| of the user's variables d (the DecisionMap)."""
        decision = decision_of(lp)
        return {"decision_error": relative_distance(decision.of(x), decision.of(x_orig))}
