"""Running SCS: settings, the status table, and the timed call shared by the SDP and QP adapters.

SCS solves min 1/2 x^T P x + c^T x s.t. A x + s = b, s in K, with the cone K given by the keys
``z`` (zeros), ``l`` (nonnegatives), ``q`` (second-order cone sizes), ``s`` (PSD cone orders) in
that row order. Facts this relies on (checked against scs 3.3.1): ``P`` is read as its UPPER
triangle; the PSD cone is vectorised like :func:`calib.problems.svec.svec`; an infeasible problem returns
NaN for x and a certificate in y.

One thread: the QDLDL direct solver is named explicitly (the default would pick the MKL backend when
it loads, which may start threads), and the OpenBLAS bundled with SCS is built without threading.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Optional

import numpy as np
import scipy.sparse as sp
import scs

from calib.solvers.result import SolveResult

#: SCS ``status_val`` -> calib status. "Inaccurate" answers are never taken as certified.
STATUS_TABLE: dict = {
    scs.SOLVED: "optimal",
    scs.SOLVED_INACCURATE: "unverified",
    scs.INFEASIBLE: "infeasible",
    scs.INFEASIBLE_INACCURATE: "unverified",
    scs.UNBOUNDED: "unbounded",
    scs.UNBOUNDED_INACCURATE: "unverified",
    scs.INDETERMINATE: "solver_failed",
    scs.FAILED: "solver_failed",
    scs.SIGINT: "stopped_on_time",
    scs.UNFINISHED: "solver_failed",
}

#: Statuses SCS vouches for; any other answer is checked against the iteration and time limits.
_CERTIFIED = {scs.SOLVED, scs.INFEASIBLE, scs.UNBOUNDED}

#: Settings applied to every solve (tolerances are SCS's relative/absolute residual and gap
#: tolerances; SCS's own default of 1e-4 is too loose to measure small objective errors).
DEFAULT_SETTINGS = {
    "eps_abs": 1e-6,
    "eps_rel": 1e-6,
    "eps_infeas": 1e-7,
    "max_iters": 100_000,
    "verbose": False,
    "linear_solver": "qdldl",
}


@dataclass
class ScsAnswer:
    """Raw SCS output: primal x, slack s, dual y (NaN when SCS gives none) and the mapped result."""

    x: np.ndarray
    s: np.ndarray
    y: np.ndarray
    result: SolveResult


def run_scs(data: dict, cone: dict, time_limit: float = 60.0, settings: Optional[dict] = None) -> ScsAnswer:
    """Solve one SCS problem; ``data`` has P (upper triangle, CSC, optional), A (CSC), b, c.

    ``time_limit`` is in seconds. The returned :class:`SolveResult` carries the status (mapped by
    :data:`STATUS_TABLE`, then refined to "stopped_on_iterations" / "stopped_on_time" when an uncertified stop
    hit a limit), SCS's own code and message, the objective c^T x + 1/2 x^T P x (NaN unless
    optimal), iterations, wall time and every setting used. ``x`` and ``dual`` are left for the
    caller, which knows the problem's layout.
    """
    used = {**DEFAULT_SETTINGS, "time_limit_secs": float(time_limit), **(settings or {})}
    start = time.perf_counter()
    solver = scs.SCS(data, cone, **used)
    answer = solver.solve()
    seconds = time.perf_counter() - start
    info = answer["info"]
    code = int(info["status_val"])
    result = SolveResult(
        status=_status(code, info, used), solver="scs", solver_code=code, solver_message=str(info["status"]),
        iterations=int(info["iter"]), seconds=seconds, options=used,
    )
    if result.status == "optimal":
        result.objective = float(info["pobj"])
    return ScsAnswer(x=np.asarray(answer["x"]), s=np.asarray(answer["s"]), y=np.asarray(answer["y"]), result=result)


def _status(code: int, info: dict, settings: dict) -> str:
    status = STATUS_TABLE.get(code, "solver_failed")
    if code in _CERTIFIED:
        return status
    if int(info["iter"]) >= int(settings["max_iters"]):
        return "stopped_on_iterations"
    limit = float(settings.get("time_limit_secs", 0.0))
    if limit > 0 and (info["setup_time"] + info["solve_time"]) / 1000.0 >= limit:
        return "stopped_on_time"
    return status


def upper_csc(Q) -> sp.csc_array:
    """The upper triangle of a symmetric matrix as CSC (what SCS reads as P)."""
    return sp.csc_array(sp.triu(sp.csc_array(Q), format="csc"))
