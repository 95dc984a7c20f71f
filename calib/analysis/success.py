"""Success of a trial, decided at analysis time from stored metrics.

A predicate is a set of tolerances; a metric whose tolerance is None is not checked. Every
predicate also requires the projected problem to be classified like the original: a feasible
original needs an optimal projected solve, an infeasible original an infeasible projected one
(a row projection is a relaxation, so "original infeasible, projected feasible" is the one-sided
error counted here). Rows whose trial errored count as failures.

Presets (README, "Reading the table"):

- ``bound``: the projected optimum is within ``gap`` of the original optimum (relative), i.e. the
  projected problem is a trustworthy bound.
- ``solution``: the retrieved point's objective error, feasibility error and sign violation are
  each within their tolerance.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Optional

import numpy as np
import pandas as pd

from calib.errors import InputError


@dataclass(frozen=True)
class Predicate:
    """Tolerances (all relative, see :mod:`calib.metrics`); None means not checked."""

    name: str = "bound"
    gap: Optional[float] = 0.05
    obj: Optional[float] = None
    feas: Optional[float] = None
    sign: Optional[float] = None
    distortion: Optional[float] = None

    def as_dict(self) -> dict:
        return asdict(self)


PRESETS = {
    "bound": Predicate("bound", gap=0.05),
    "solution": Predicate("solution", gap=None, obj=0.05, feas=0.05, sign=0.05),
}

_TOLERANCE_FIELDS = {"gap": "proj_gap", "obj": "obj_error", "feas": "feas_error", "sign": "sign_violation",
                     "distortion": "distortion_max"}


def make_predicate(preset: str = "bound", **overrides) -> Predicate:
    """A preset with some tolerances overridden (validated: each must be > 0 and finite)."""
    if preset not in PRESETS:
        raise InputError("--preset", f"unknown preset {preset!r}", f"choose one of {', '.join(sorted(PRESETS))}")
    values = PRESETS[preset].as_dict()
    custom = False
    for key, value in overrides.items():
        if value is None:
            continue
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"--tol-{key}", f"must be a positive number, got {value!r}", "e.g. 0.05 for 5%")
        values[key] = float(value)
        custom = True
    if custom:
        values["name"] = f"{preset}+custom"
    return Predicate(**values)


def evaluate(rows: pd.DataFrame, predicate: Predicate) -> pd.Series:
    """Boolean success per row of the tidy trial table (see :func:`calib.analysis.tables.load_rows`)."""
    ok = rows["status"].eq("ok")
    orig_feasible = rows["orig_status"].eq("optimal")
    orig_infeasible = rows["orig_status"].eq("infeasible")
    classified = (orig_feasible & rows["proj_status"].eq("optimal")) | (orig_infeasible & rows["proj_status"].eq("infeasible"))
    points = rows["kind"].eq("points")
    success = ok & (classified | points)
    for key, column in _TOLERANCE_FIELDS.items():
        tolerance = getattr(predicate, key)
        if tolerance is None or column not in rows:
            continue
        values = pd.to_numeric(rows[column], errors="coerce")
        applies = orig_feasible if key != "distortion" else points
        # a checked metric that is missing where it applies is a failure, never a pass
        success &= ~applies | (values.le(tolerance) & values.notna())
    return success
