"""HiGHS adapter for LPs in standard form (one solver thread, quiet), by simplex or interior point.

Methods (:data:`LP_METHODS`): ``simplex`` (HiGHS's dual simplex, its default simplex strategy;
returns a basis) and ``ipm`` (HiGHS's interior-point solver IPX, J. A. J. Hall et al.; with
crossover to a basic solution when the caller needs a basis, without it otherwise, which is
cheaper on large dense problems). The options actually used (``solver``, ``run_crossover``,
``presolve``) are recorded with every result.

A trap (measured with highspy 1.16): before interior point, HiGHS's presolve on a large dense LP
(a basis-pursuit LP with a dense 500 x 2000 matrix) ran 130 s and ignored a 10 s time limit, and
IPX then never started; with presolve off the same solve obeys the limit. ``ipm`` therefore runs
without presolve on a matrix that is dense and large (:func:`calib.solvers.methods.dense_and_large`).

Statuses are mapped by :data:`STATUS_TABLE`, which keeps HiGHS's own code and message. Facts this
relies on (checked against highspy 1.16): ``run()`` returns kOk even for infeasible models, so the
model status decides; the thread scheduler is global per process, so every Highs object here uses
``threads = 1``; the first ``Highs()`` in a process prints a banner on stdout, which
:mod:`calib.problems.highs_handle` silences.
"""

from __future__ import annotations

import time
from typing import Optional

import highspy
import numpy as np
import scipy.sparse as sp

from calib.problems.highs_handle import quiet_highs
from calib.problems.lp import StandardLP
from calib.solvers.result import SolveResult

_MS = highspy.HighsModelStatus

#: HiGHS model status -> calib status.
STATUS_TABLE: dict = {
    _MS.kOptimal: "optimal",
    _MS.kInfeasible: "infeasible",
    _MS.kUnbounded: "unbounded",
    _MS.kUnboundedOrInfeasible: "no_finite_optimum",
    _MS.kTimeLimit: "stopped_on_time",
    _MS.kIterationLimit: "stopped_on_iterations",
    _MS.kInterrupt: "stopped_on_time",
    _MS.kHighsInterrupt: "stopped_on_time",
    _MS.kObjectiveBound: "unverified",
    _MS.kObjectiveTarget: "unverified",
    _MS.kSolutionLimit: "unverified",
    _MS.kUnknown: "unverified",
    _MS.kNotset: "solver_failed",
    _MS.kLoadError: "solver_failed",
    _MS.kModelError: "solver_failed",
    _MS.kPresolveError: "solver_failed",
    _MS.kSolveError: "solver_failed",
    _MS.kPostsolveError: "solver_failed",
    _MS.kModelEmpty: "solver_failed",
    _MS.kMemoryLimit: "solver_failed",
}

#: Options applied to every solve. ``threads`` must stay the same within a process.
DEFAULT_OPTIONS = {
    "output_flag": False,
    "threads": 1,
    "random_seed": 0,
}

def new_highs(options: Optional[dict] = None) -> "highspy.Highs":
    """A quiet ``highspy.Highs`` (:func:`calib.problems.highs_handle.quiet_highs`) with
    :data:`DEFAULT_OPTIONS` plus ``options``."""
    return quiet_highs({**DEFAULT_OPTIONS, **(options or {})})


def _to_highs_lp(lp: StandardLP) -> "highspy.HighsLp":
    A = sp.csc_array(lp.A) if sp.issparse(lp.A) else sp.csc_array(np.asarray(lp.A))
    A.sum_duplicates()
    hlp = highspy.HighsLp()
    hlp.num_col_ = lp.n_cols
    hlp.num_row_ = lp.n_rows
    hlp.col_cost_ = lp.c
    hlp.col_lower_ = np.zeros(lp.n_cols)
    hlp.col_upper_ = np.full(lp.n_cols, highspy.kHighsInf)
    hlp.row_lower_ = lp.b
    hlp.row_upper_ = lp.b
    hlp.offset_ = float(lp.offset)
    hlp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    hlp.a_matrix_.start_ = A.indptr.astype(np.int32)
    hlp.a_matrix_.index_ = A.indices.astype(np.int32)
    hlp.a_matrix_.value_ = A.data
    return hlp


#: LP method name -> HiGHS options (``ipm``'s crossover is set per solve, see :func:`method_options`)
LP_METHODS = {"simplex": {"solver": "simplex"}, "ipm": {"solver": "ipm"}}


def method_options(method: str, need_basis: bool, dense: bool = False) -> dict:
    """HiGHS options of an LP method; ``ipm`` runs crossover only when a basis is needed, and no
    presolve on a dense large matrix (the trap of the module docstring).

    >>> method_options("ipm", need_basis=False)
    {'solver': 'ipm', 'run_crossover': 'off'}
    >>> method_options("ipm", need_basis=True, dense=True)
    {'solver': 'ipm', 'run_crossover': 'on', 'presolve': 'off'}
    >>> method_options("simplex", need_basis=False)
    {'solver': 'simplex'}
    """
    options = dict(LP_METHODS[method])
    if method == "ipm":
        options["run_crossover"] = "on" if need_basis else "off"
        if dense:
            options["presolve"] = "off"
    return options


def solve_lp(lp: StandardLP, time_limit: float = 60.0, options: Optional[dict] = None,
             warm_basis: Optional["highspy.HighsBasis"] = None, method: str = "simplex",
             need_basis: bool = True) -> SolveResult:
    """Solve min c^T x + offset s.t. A x = b, x >= 0 with HiGHS by ``method`` (:data:`LP_METHODS`).

    ``time_limit`` is in seconds. Returns a :class:`SolveResult`; ``basis`` holds the indices of
    basic structural columns (simplex, or ipm with crossover; None otherwise). Never raises for
    infeasible or unbounded models. ``solver`` of the result is ``highs-<method>``.
    """
    from calib.solvers.methods import dense_and_large

    dense = method == "ipm" and dense_and_large(lp.A)
    used = {**method_options(method, need_basis, dense), "time_limit": float(time_limit), **(options or {})}
    h = new_highs(used)
    h.passModel(_to_highs_lp(lp))
    if warm_basis is not None:
        h.setBasis(warm_basis)
    start = time.perf_counter()
    h.run()
    seconds = time.perf_counter() - start
    return collect_result(h, seconds, {**DEFAULT_OPTIONS, **used}, f"highs-{method}", n_cols=lp.n_cols)


def collect_result(h: "highspy.Highs", seconds: float, options: dict, solver: str, n_cols: Optional[int] = None,
                   dual_sign: float = 1.0) -> SolveResult:
    """The :class:`SolveResult` of a HiGHS run: status by :data:`STATUS_TABLE` with HiGHS's own code and
    message, iterations of every HiGHS solver summed (simplex, interior point, QP), and when optimal the
    point, the row duals times ``dual_sign`` and the objective; with ``n_cols``, the basic structural columns.
    """
    model_status = h.getModelStatus()
    status = STATUS_TABLE.get(model_status, "solver_failed")
    info = h.getInfo()
    result = SolveResult(
        status=status, solver=solver, solver_code=int(model_status),
        solver_message=h.modelStatusToString(model_status),
        iterations=int(sum(max(count, 0) for count in (info.simplex_iteration_count, info.ipm_iteration_count,
                                                       info.qp_iteration_count))),
        seconds=seconds, options=options,
    )
    if status == "optimal":
        solution = h.getSolution()
        result.x = np.asarray(solution.col_value, dtype=float)
        result.dual = dual_sign * np.asarray(solution.row_dual, dtype=float)
        result.objective = float(info.objective_function_value)
        basis = h.getBasis() if n_cols is not None else None
        if basis is not None and basis.valid:
            col_status = basis.col_status
            result.basis = np.array([j for j in range(n_cols) if col_status[j] == highspy.HighsBasisStatus.kBasic], dtype=np.int64)
    return result


def basis_of(lp_result_highs: "highspy.Highs") -> "highspy.HighsBasis":  # pragma: no cover - thin
    return lp_result_highs.getBasis()
