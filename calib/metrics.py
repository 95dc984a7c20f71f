"""The one metrics record every trial produces, whatever the problem class.

A trial solves the original problem (cached per instance), projects it, solves the projected
problem, retrieves an original-space point with each retrieval method and measures it. Every row
of the store holds one :data:`FIELDS` record; fields a class cannot fill are ``None`` by design
(listed in :data:`FIELDS` under "classes"), never silently missing.

Relative errors use the denominator max(1, |reference|): relative for large values, absolute for
values near zero (common practice in optimization benchmarking).
"""

from __future__ import annotations

import math
from typing import Optional

import numpy as np

#: field -> (meaning, units, classes that fill it)
FIELDS: dict[str, tuple[str, str, str]] = {
    "orig_status": ("status of the original solve (calib vocabulary)", "-", "all"),
    "orig_objective": ("optimal value of the original problem", "objective units", "lp sdp qp"),
    "proj_status": ("status of the projected solve", "-", "all"),
    "proj_message": ("the solver's own status text for the projected solve", "-", "all"),
    "proj_objective": ("optimal value of the projected problem", "objective units", "lp sdp qp"),
    "proj_gap": ("(orig - proj) / max(1, |orig|): the projected bound's relative gap (>= 0 for a relaxation)", "ratio", "lp sdp qp"),
    "orig_feasible": ("the original problem is feasible (solver verdict)", "bool", "lp sdp qp"),
    "proj_feasible": ("the projected problem is feasible (solver verdict)", "bool", "lp sdp qp"),
    "obj_error": ("|f(x_retrieved) - orig| / max(1, |orig|)", "ratio", "lp sdp qp"),
    "feas_error": ("||A x_retrieved - b|| / max(1, ||b||) (QP: largest violation of Ax <= b, relative)", "ratio", "lp sdp qp"),
    "sign_violation": ("||min(x_retrieved, 0)|| / max(1, ||x_retrieved||) (SDP: PSD violation)", "ratio", "lp sdp"),
    "distortion_max": ("worst pairwise |‖T(p-q)‖²/‖p-q‖² - 1|", "ratio", "points"),
    "distortion_q99": ("99th percentile of the pairwise distortion", "ratio", "points"),
    "proj_iterations": ("solver iterations on the projected problem", "count", "lp sdp qp"),
    "t_sketch": ("draw T plus apply it to the data", "s", "all"),
    "t_solve_proj": ("solve the projected problem", "s", "lp sdp qp"),
    "t_retrieve": ("retrieve the original-space point", "s", "lp sdp qp"),
}


def rel_diff(value: float, reference: float) -> Optional[float]:
    """|value - reference| / max(1, |reference|), or None when either is not finite.

    >>> rel_diff(101.0, 100.0)
    0.01
    >>> rel_diff(0.5, 0.0)
    0.5
    """
    if not (math.isfinite(value) and math.isfinite(reference)):
        return None
    return abs(value - reference) / max(1.0, abs(reference))


def ratio(numerator: float, denominator: float) -> float:
    """numerator / max(1, denominator)."""
    return float(numerator) / max(1.0, float(denominator))


def clean(value):
    """JSON-safe value: numpy scalars to Python, non-finite floats to None."""
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    return value


def record(**values) -> dict:
    """A complete metrics record: every field of :data:`FIELDS`, missing ones as None."""
    unknown = set(values) - set(FIELDS)
    if unknown:
        raise KeyError(f"unknown metric fields: {sorted(unknown)}")
    return {name: clean(values.get(name)) for name in FIELDS}
