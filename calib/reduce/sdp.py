"""SDP constraint aggregation and its retrievals.

The projected SDP of min <C, X>, <A_i, X> = b_i (i < m), X PSD under T (k x m) keeps k aggregated
constraints <sum_j T_ij A_j, X> = (Tb)_i: in svec coordinates (see :mod:`calib.conic`) the
constraint matrix becomes T A and the right-hand side T b. Every feasible X of the original stays
feasible, so the projected optimum is a lower bound and an infeasible projection certifies an
infeasible original (the one-sided error). Both problems are solved with SCS.

Retrievals of the projected optimum X' (svec x'):

``affine``
    The least-Frobenius-norm correction onto the original constraints, x' + A^+(b - A x') (exact
    equalities, possibly indefinite).
``affine-psd``
    That correction followed by the PSD repair: eigenvalue clipping X = V max(Lambda, 0) V^T, the
    nearest PSD matrix in the Frobenius norm (N. J. Higham, "Computing a nearest symmetric positive
    semidefinite matrix", Linear Algebra Appl. 103:103–118, 1988). PSD, equalities approximate.
``alternating``
    The correction, then alternating projections between the constraints and the PSD cone, with
    the stopping rule of :func:`calib.reduce.affine.alternate` (PSD violation <= 1e-9, a stalled
    round, 500 rounds or the solver time limit); the point returned satisfies the equalities.

Errors recorded for each (see :mod:`calib.metrics`): feas_error = ||A(X) - b|| over the
feasibility scale of the kind, and sign_violation = the PSD violation ||X_-||_F / ||X||_F of
:func:`psd_violation`. Both problems are solved by the methods of :mod:`calib.solvers.methods`
(SCS with the spec's settings).

Reference for the aggregation: A. Bluhm and D. S. França, "Dimensionality reduction of SDPs
through sketching", Linear Algebra and its Applications 563:461–475, 2019.
"""

from __future__ import annotations

import numpy as np

from calib.conic import StandardSDP, smat, svec
from calib.projectors.base import Projector
from calib.reduce.affine import affine_set, alternate
from calib.reduce.base import Context, Retrieved, RowProjectionHandler, linear_size
from calib.solvers.result import SolveResult


def project_sdp(sdp: StandardSDP, projector: Projector) -> StandardSDP:
    """min <C, X>, (TA) svec(X) = Tb, X PSD for a projector T of shape (k, m)."""
    return SDPHandler.reduce(sdp, projector)


def psd_clip(x: np.ndarray) -> np.ndarray:
    """svec of the nearest PSD matrix to smat(x) in the Frobenius norm (negative eigenvalues set to 0).

    >>> psd_clip(svec(np.diag([2.0, -1.0]))).tolist()
    [2.0, 0.0, 0.0]
    """
    values, vectors = np.linalg.eigh(smat(x))
    return svec((vectors * np.maximum(values, 0.0)) @ vectors.T)


def psd_violation(x: np.ndarray) -> float:
    """||X_-||_F / ||X||_F for X = smat(x), X_- its negative part (0 at X = 0).

    ||X_-||_F is the 2-norm of the negative eigenvalues, and ||X||_F = ||x|| (svec keeps norms).

    >>> psd_violation(svec(np.diag([3.0, -4.0]))), round(psd_violation(svec(np.diag([0.03, -0.04]))), 12)
    (0.8, 0.8)
    """
    values = np.linalg.eigvalsh(smat(x))
    negative = np.linalg.norm(np.minimum(values, 0.0))
    return 0.0 if negative == 0.0 else float(negative / np.linalg.norm(x))


def _affine(context: Context) -> Retrieved:
    affine, building = affine_set(context.problem)
    return Retrieved(affine.project(context.projected.x), {"t_factor": affine.seconds}, building)


def _affine_psd(context: Context) -> Retrieved:
    got = _affine(context)
    return Retrieved(psd_clip(got.x), got.extra, got.untimed)


def _alternating(context: Context) -> Retrieved:
    affine, building = affine_set(context.problem)
    out = alternate(context.projected.x, affine, psd_clip, psd_violation, max_seconds=context.time_limit)
    return Retrieved(out.x, {"retrieval_iterations": out.rounds, "t_factor": affine.seconds}, building)


#: retrieval name -> function(Context) -> Retrieved
RETRIEVALS = {
    "affine-psd": _affine_psd,
    "affine": _affine,
    "alternating": _alternating,
}


class SDPHandler(RowProjectionHandler):
    """Constraints aggregated (a relaxation); retrievals of :data:`RETRIEVALS`, default ``affine-psd``."""

    kind = "sdp"
    retrievals = RETRIEVALS
    default_retrieval = "affine-psd"
    cone_violation = staticmethod(psd_violation)

    @staticmethod
    def solve_with(sdp: StandardSDP, method: str, solver: dict, need_basis: bool) -> SolveResult:
        """SCS (the one SDP method) within the spec's time limit (seconds), with its ``scs`` settings."""
        from calib.solvers.scs_sdp import solve_sdp

        return solve_sdp(sdp, time_limit=solver["time_limit_s"], settings=solver.get("scs"))

    @staticmethod
    def objective_size(sdp: StandardSDP, x: np.ndarray) -> float:
        """|c|^T |x| + |offset| at the svec point x, shape (n (n + 1) / 2,)."""
        return linear_size(sdp.c_vec, x, sdp.offset)

    @staticmethod
    def decision_metrics(sdp: StandardSDP, x: np.ndarray, x_orig: np.ndarray) -> dict:
        """Max-cut SDPs: the expected cut of hyperplane rounding of the original optimum and of x (each
        rescaled to unit diagonal), ``cut_original``, ``cut_ratio`` and ``cut_gain_kept`` (the share of the
        original rounding's gain over a coin flip per node, sum(W)/4, that x keeps; :mod:`calib.reduce.rounding`)."""
        if sdp.cut_graph is None:
            return {}
        from calib.reduce.rounding import expected_cut  # lazy: only max-cut problems need it

        original = expected_cut(sdp.cut_graph, smat(x_orig))
        retrieved = expected_cut(sdp.cut_graph, smat(x))
        coin = float(np.sum(sdp.cut_graph)) / 4.0  # a fair coin per node cuts each edge with probability 1/2
        return {"cut_original": original, "cut_ratio": retrieved / original if original > 0 else None,
                "cut_gain_kept": (retrieved - coin) / (original - coin) if original > coin else None}
