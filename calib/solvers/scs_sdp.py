"""SCS adapter for standard-form SDPs (one thread, quiet; settings in :mod:`calib.solvers.scs_base`).

The SDP min <C, X> s.t. <A_i, X> = b_i, X PSD is passed to SCS with the variable x = svec(X)::

    [ A  ] x + s = [ b ],   s in {0}^m  x  PSD(n)       (cone {"z": m, "s": [n]})
    [ -I ]         [ 0 ]

so the PSD slack is s = svec(X) itself. SCS's dual y = (y_eq, svec(S)) satisfies
-A^T y_eq + svec(S) = svec(C); the standard SDP dual multipliers are lambda = -y_eq, with
C - sum_i lambda_i A_i = S PSD and b^T lambda the dual objective.
"""

from __future__ import annotations

from typing import Optional

import numpy as np
import scipy.sparse as sp

from calib.problems.sdp import StandardSDP

from calib.problems.svec import smat, svec_size
from calib.solvers.result import SolveResult
from calib.solvers.scs_base import run_scs


def scs_sdp_data(sdp: StandardSDP) -> tuple[dict, dict]:
    """The SCS ``data`` and ``cone`` dictionaries for ``sdp`` (layout in the module docstring)."""
    size = svec_size(sdp.order)
    A = sp.vstack([sp.csr_array(sdp.A), -sp.identity(size, format="csr")], format="csc")
    b = np.concatenate([sdp.b, np.zeros(size)])
    return {"A": A, "b": b, "c": sdp.c_vec}, {"z": sdp.n_rows, "s": [sdp.order]}


def solve_sdp(sdp: StandardSDP, time_limit: float = 60.0, settings: Optional[dict] = None) -> SolveResult:
    """Solve a standard-form SDP with SCS.

    ``time_limit`` is in seconds; ``settings`` override :data:`calib.solvers.scs_base.DEFAULT_SETTINGS`
    (e.g. ``{"eps_abs": 1e-7, "eps_rel": 1e-7}``). When optimal, ``x`` is svec(X) taken from SCS's
    PSD slack (so X is PSD up to rounding; its equality residual is SCS's primal residual), recover
    the matrix with :func:`primal_matrix`; ``dual`` holds the multipliers lambda (shape (m,)) and
    ``objective`` includes the offset. Never raises for infeasible or unbounded problems.
    """
    data, cone = scs_sdp_data(sdp)
    answer = run_scs(data, cone, time_limit, settings)
    result = answer.result
    if result.status == "optimal":
        result.x = answer.s[sdp.n_rows:].copy()
        result.dual = -answer.y[:sdp.n_rows]
        result.objective += float(sdp.offset)
    return result


def primal_matrix(result: SolveResult) -> np.ndarray:
    """The n x n matrix X of an SDP result (``smat`` of ``result.x``)."""
    if result.x is None:
        raise ValueError(f"no primal point in a result with status {result.status!r}")
    return smat(result.x)
