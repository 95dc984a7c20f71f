"""Success of a trial, decided at analysis time from stored metrics.

A predicate is a set of tolerances; a metric whose tolerance is None is not checked, and a metric
is only checked on the problem kinds that fill it (:data:`calib.metrics.FIELDS`). With
``classify`` on, an LP, SDP or QP trial must also be classified like the original: a feasible
original needs an optimal projected solve, an infeasible original an infeasible projected one (a
row projection is a relaxation, so "original infeasible, projected feasible" is the one-sided
error counted here). Rows whose trial errored count as failures.

A predicate *covers* a problem kind when it checks something on it; rows of kinds it does not
cover are left out of the analysis and listed with the reason (a point set is never declared a
success by a predicate that only looks at LP gaps).

Presets (README, "Reading the table"):

- ``bound``: the projected optimum is within ``gap`` of the original optimum (relative, absolute
  value), i.e. the projected problem is a trustworthy bound.
- ``solution``: the retrieved point's objective error, feasibility error and sign violation are
  each within their tolerance.
- ``classify``: only the feasibility verdict of the projected problem must match the original.
- ``distortion``: point sets; the worst pairwise distortion of squared distances is at most
  ``distortion`` (this tolerance is the JL eps itself).

The *primary tolerance* tau of a preset is the tolerance(s) it sets; :func:`with_tau` moves them
together, which is how a table carries a ladder of tolerances.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import TYPE_CHECKING, Optional

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from calib.errors import InputError
from calib.metrics import FIELDS

#: tolerance name -> stored metric column, in the order "the primary error" is chosen
TOLERANCE_METRICS = {"gap": "proj_gap", "obj": "obj_error", "feas": "feas_error", "sign": "sign_violation",
                     "distortion": "distortion_max"}
#: problem kinds whose projected solve has a feasibility verdict
OPTIMIZATION_KINDS = ("lp", "sdp", "qp")


@dataclass(frozen=True)
class Predicate:
    """Tolerances (all relative, see :mod:`calib.metrics`); None means not checked."""

    name: str = "bound"
    gap: Optional[float] = 0.05
    obj: Optional[float] = None
    feas: Optional[float] = None
    sign: Optional[float] = None
    distortion: Optional[float] = None
    classify: bool = True

    def as_dict(self) -> dict:
        return asdict(self)

    def checks(self, kind: str) -> list[str]:
        """Tolerance names checked on rows of ``kind`` (metrics the kind does not fill are skipped)."""
        return [key for key, column in TOLERANCE_METRICS.items()
                if getattr(self, key) is not None and kind in FIELDS[column].classes.split()]

    def covers(self, kind: str) -> bool:
        """Whether the predicate decides anything on rows of ``kind``."""
        return bool(self.checks(kind)) or (self.classify and kind in OPTIMIZATION_KINDS)

    def error_metric(self, kind: str) -> Optional[str]:
        """The stored metric reported as "the error" of rows of ``kind`` (first checked one)."""
        checked = self.checks(kind)
        return TOLERANCE_METRICS[checked[0]] if checked else None


PRESETS = {
    "bound": Predicate("bound", gap=0.05),
    "solution": Predicate("solution", gap=None, obj=0.05, feas=0.05, sign=0.05),
    "classify": Predicate("classify", gap=None),
    "distortion": Predicate("distortion", gap=None, distortion=0.2, classify=False),
}

#: preset -> tolerances that its tau moves
PRIMARY = {"bound": ("gap",), "solution": ("obj", "feas", "sign"), "classify": (), "distortion": ("distortion",)}


def _positive(value, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not (np.isfinite(value) and value > 0):
        raise InputError(where, f"must be a positive number, got {value!r}", "e.g. 0.05 for 5%")
    return float(value)


def make_predicate(preset: str = "bound", **overrides) -> Predicate:
    """A preset with some tolerances overridden (validated: each must be > 0 and finite).

    >>> make_predicate("bound", gap=0.01).gap
    0.01
    >>> make_predicate("solution", feas=0.1).name
    'solution+custom'
    """
    if preset not in PRESETS:
        raise InputError("--preset", f"unknown preset {preset!r}", f"choose one of {', '.join(sorted(PRESETS))}")
    values = {}
    for key, value in overrides.items():
        if value is not None:
            values[key] = _positive(value, f"--tol-{key}")
    predicate = replace(PRESETS[preset], **values)
    return replace(predicate, name=f"{preset}+custom") if values else predicate


def preset_of(predicate: Predicate) -> str:
    """The preset a predicate was made from ("bound+custom" -> "bound")."""
    return predicate.name.split("+")[0]


def primary_tau(predicate: Predicate) -> Optional[float]:
    """The primary tolerance of the predicate (the largest of the ones its preset moves), or None.

    >>> primary_tau(PRESETS["solution"])
    0.05
    >>> primary_tau(PRESETS["classify"]) is None
    True
    """
    values = [getattr(predicate, key) for key in PRIMARY.get(preset_of(predicate), ()) if getattr(predicate, key) is not None]
    return max(values) if values else None


def with_tau(predicate: Predicate, tau: float) -> Predicate:
    """The predicate with its primary tolerance(s) set to ``tau``.

    >>> with_tau(PRESETS["solution"], 0.1).feas
    0.1
    """
    keys = PRIMARY.get(preset_of(predicate), ())
    if not keys:
        raise InputError("--tau", f"preset {preset_of(predicate)!r} has no tolerance to vary",
                         "use --preset bound, solution or distortion with --tau")
    tau = _positive(tau, "--tau")
    return replace(predicate, **{key: tau for key in keys})


def evaluate(rows: pd.DataFrame, predicate: Predicate) -> pd.Series:
    """Boolean success per row of the tidy trial table (see :func:`calib.analysis.tables.load_rows`).

    Rows of kinds the predicate does not cover come out False; drop them first (:meth:`Predicate.covers`).
    """
    import pandas as pd  # here, not at import: the CLI builds its parsers from this module's presets
    success = rows["status"].eq("ok")
    orig_feasible = rows["orig_status"].eq("optimal")
    if predicate.classify:
        orig_infeasible = rows["orig_status"].eq("infeasible")
        classified = (orig_feasible & rows["proj_status"].eq("optimal")) | (orig_infeasible & rows["proj_status"].eq("infeasible"))
        success &= classified | ~rows["kind"].isin(OPTIMIZATION_KINDS)
    for key, column in TOLERANCE_METRICS.items():
        tolerance = getattr(predicate, key)
        if tolerance is None:
            continue
        kinds = FIELDS[column].classes.split()
        applies = rows["kind"].isin(kinds)
        if column != "distortion_max":
            applies &= orig_feasible  # objective metrics exist only when the original has an optimum
        values = pd.to_numeric(rows[column], errors="coerce").abs()
        # a checked metric that is missing where it applies is a failure, never a pass
        success &= ~applies | (values.le(tolerance) & values.notna())
    covered = rows["kind"].map(predicate.covers).astype(bool)
    return success & covered
