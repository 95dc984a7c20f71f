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

- ``usable`` (the default): the answer a user gets back is usable. The feasibility verdict
  matches, and the point returned by *that* retrieval meets the objective-error and feasibility
  tolerances of its kind (lp: ||A x - b|| and the sign violation; sdp: the affine residual and
  the PSD violation; qp: its constraints), every error relative to the kind's scale of
  :mod:`calib.metrics`. Each retrieval gets its own verdict. (``solution`` is the former name.)
- ``policy``: ``usable`` and faster end to end than the fair baseline (below).
- ``bound``: the projected optimum is within ``gap`` of the original optimum (relative to the
  objective's scale), i.e. the projected problem is a trustworthy bound; the same verdict for
  every retrieval of one projected solve, since it never looks at a retrieved point.
- ``classify``: only the feasibility verdict of the projected problem must match the original.
- ``distortion``: point sets; the worst pairwise distortion of squared distances is at most
  ``distortion`` (this tolerance is the JL eps itself).
- ``clustering``: clustering; the partition found on the projected points costs, on the original
  points, at most 1 + ``cost`` times the partition found on them by the same method from the same
  starts: ``cluster_cost_ratio - 1 <= cost`` (one-sided: a ratio below 1, a better partition, passes).

Cost (``faster``, set by the ``policy`` preset or ``--faster`` on any preset): a trial of an LP, SDP,
QP or clustering also needs t_total < t_baseline, i.e. sketch + projected solve + this retrieval (with its
extra solves) took less wall time than the original solved by its fastest configured method; a
warm start must also have saved simplex iterations (iterations_saved > 0). Such a verdict depends
on measured times, so it can differ between two runs of one campaign.

Exact retrievals (``exact`` in the record: a warm start, or a restricted repair that widened to all
columns) return the original's own optimum: their errors are zero by construction, so their
success is about saving time, never about error. With the cost condition (``policy``,
``--faster``) they succeed exactly when they save time. Under a preset that judges the retrieved
point without it (``usable``, custom ``obj``/``feas``/``sign``) they count as failures: the
reduction gave no answer of its own, and those presets must not depend on measured times (their
tables are byte-identical between runs). ``bound`` and ``classify`` never look at the point.

The *primary tolerance* tau of a preset is the tolerance(s) it sets; :func:`with_tau` moves them
together, which is how a table carries a ladder of tolerances.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import TYPE_CHECKING, Any, Mapping, Optional, Sequence

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from calib.checks import is_real
from calib.errors import InputError
from calib.metrics import FIELDS

#: tolerance name -> stored metric column, in the order "the primary error" is chosen
TOLERANCE_METRICS = {"gap": "proj_gap", "obj": "obj_error", "feas": "feas_error", "sign": "sign_violation",
                     "distortion": "distortion_max", "cost": "cluster_cost_ratio"}
#: metrics whose error is their excess over a reference value, signed (one-sided tolerance): column -> reference
EXCESS_OVER = {"cluster_cost_ratio": 1.0}
#: problem kinds whose projected solve has a feasibility verdict
OPTIMIZATION_KINDS = ("lp", "sdp", "qp", "milp")
#: problem kinds whose trials are timed against a fair baseline (the cost condition applies to them)
TIMED_KINDS = OPTIMIZATION_KINDS + ("clustering",)


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
    faster: bool = False
    cost: Optional[float] = None

    def as_dict(self) -> dict:
        """The fields; ``cost`` only when set (a table of a predicate without it keeps its former keys)."""
        values = asdict(self)
        if values["cost"] is None:
            del values["cost"]
        return values

    def checks(self, kind: str) -> list[str]:
        """Tolerance names checked on rows of ``kind`` (metrics the kind does not fill are skipped)."""
        return [key for key, column in TOLERANCE_METRICS.items()
                if getattr(self, key) is not None and kind in FIELDS[column].classes.split()]

    def covers(self, kind: str) -> bool:
        """Whether the predicate decides anything on rows of ``kind``."""
        return bool(self.checks(kind)) or (self.classify and kind in OPTIMIZATION_KINDS)

    def judges_points(self) -> bool:
        """Whether the predicate looks at retrieved points (then exact retrievals must save time)."""
        return any(getattr(self, key) is not None for key in ("obj", "feas", "sign"))

    def describe(self) -> str:
        """What a success must meet, in words: the verdict, the tolerances, the cost condition.

        >>> PRESETS["policy"].describe()
        'feasibility verdict matches, obj <= 0.05, feas <= 0.05, sign <= 0.05, faster end to end than the fair baseline'
        >>> PRESETS["bound"].describe(), PRESETS["classify"].describe()
        ('feasibility verdict matches, gap <= 0.05', 'feasibility verdict matches')
        """
        parts = ["feasibility verdict matches"] if self.classify else []
        parts += [f"{key} <= {getattr(self, key):g}" for key in TOLERANCE_METRICS if getattr(self, key) is not None]
        if self.faster:
            parts.append("faster end to end than the fair baseline")
        return ", ".join(parts)

    def error_metric(self, kind: str) -> Optional[str]:
        """The stored metric reported as "the error" of rows of ``kind`` (first checked one)."""
        checked = self.checks(kind)
        return TOLERANCE_METRICS[checked[0]] if checked else None


#: the default preset of `calib tables`, `report` and `probe` (of an LP, SDP or QP)
DEFAULT_PRESET = "usable"

PRESETS = {
    "usable": Predicate("usable", gap=None, obj=0.05, feas=0.05, sign=0.05),
    "policy": Predicate("policy", gap=None, obj=0.05, feas=0.05, sign=0.05, faster=True),
    "bound": Predicate("bound", gap=0.05),
    "classify": Predicate("classify", gap=None),
    "distortion": Predicate("distortion", gap=None, distortion=0.2, classify=False),
    "clustering": Predicate("clustering", gap=None, cost=0.05, classify=False),
}
#: former preset names still accepted
ALIASES = {"solution": "usable"}

#: tolerance -> the command-line option that sets it (acceptance thresholds of the analysis, not solver settings)
OPTIONS = {"gap": "--max-gap", "obj": "--max-obj-error", "feas": "--max-infeasibility", "sign": "--max-sign-violation",
           "distortion": "--max-distortion", "cost": "--max-cost-excess"}

#: preset -> tolerances that its tau moves
PRIMARY = {"usable": ("obj", "feas", "sign"), "policy": ("obj", "feas", "sign"), "bound": ("gap",), "classify": (),
           "distortion": ("distortion",), "clustering": ("cost",)}


def _positive(value, where: str) -> float:
    if not is_real(value) or not (np.isfinite(value) and value > 0):
        raise InputError(where, f"must be a positive number, got {value!r}", "e.g. 0.05 for 5%")
    return float(value)


def make_predicate(preset: "str | Predicate" = DEFAULT_PRESET, faster: bool = False, **overrides) -> Predicate:
    """A preset (by name, or a predicate given as the base) with some tolerances overridden (validated: each must be > 0 and finite), and
    ``faster`` to require the cost condition on top of any preset.

    >>> make_predicate("bound", gap=0.01).gap
    0.01
    >>> make_predicate("usable", feas=0.1).name, make_predicate("bound", faster=True).name
    ('usable+custom', 'bound+faster')
    """
    if isinstance(preset, Predicate):  # a default chosen by the caller (e.g. :func:`default_predicate`)
        base, preset = preset, preset.name
    else:
        preset = ALIASES.get(preset, preset)
        if preset not in PRESETS:
            raise InputError("--preset", f"unknown preset {preset!r}", f"choose one of {', '.join(sorted(PRESETS))}")
        base = PRESETS[preset]
    values = {}
    for key, value in overrides.items():
        if value is not None:
            values[key] = _positive(value, OPTIONS.get(key, key))
    predicate = replace(base, **values)
    name = f"{preset}+custom" if values else preset
    if faster and not predicate.faster:
        predicate, name = replace(predicate, faster=True), f"{name}+faster"
    return replace(predicate, name=name)


def default_predicate(kinds) -> Predicate:
    """The predicate a command uses when none is named: one that decides something on every problem
    kind of the store, so no kind is left out by default. Point sets alone: ``distortion``; LPs, SDPs
    and QPs: ``usable``; both: ``usable`` with the distortion tolerance of ``distortion`` for the point sets.

    >>> default_predicate({"points"}).name, default_predicate({"lp"}).name
    ('distortion', 'usable')
    >>> mixed = default_predicate({"lp", "points"})
    >>> mixed.covers("points") and mixed.covers("lp"), mixed.distortion
    (True, 0.2)
    """
    kinds = set(kinds)
    if kinds and kinds <= {"points"}:
        return PRESETS["distortion"]
    if "points" in kinds:
        return replace(PRESETS[DEFAULT_PRESET], distortion=PRESETS["distortion"].distortion)
    return PRESETS[DEFAULT_PRESET]


def preset_of(predicate: Predicate) -> str:
    """The preset a predicate was made from ("bound+custom" -> "bound")."""
    return predicate.name.split("+")[0]


def primary_tau(predicate: Predicate) -> Optional[float]:
    """The primary tolerance of the predicate (the largest of the ones its preset moves), or None.

    >>> primary_tau(PRESETS["usable"])
    0.05
    >>> primary_tau(PRESETS["classify"]) is None
    True
    """
    values = [getattr(predicate, key) for key in PRIMARY.get(preset_of(predicate), ()) if getattr(predicate, key) is not None]
    return max(values) if values else None


def with_tau(predicate: Predicate, tau: float) -> Predicate:
    """The predicate with its primary tolerance(s) set to ``tau``.

    >>> with_tau(PRESETS["usable"], 0.1).feas
    0.1
    """
    keys = PRIMARY.get(preset_of(predicate), ())
    if not keys:
        raise InputError("--tau", f"preset {preset_of(predicate)!r} has no tolerance to vary",
                         "use --preset usable, policy, bound or distortion with --tau")
    tau = _positive(tau, "--tau")
    return replace(predicate, **{key: tau for key in keys})


def _numbers(rows: pd.DataFrame, column: str) -> pd.Series:
    import pandas as pd

    if column not in rows:
        return pd.Series(np.nan, index=rows.index)
    return pd.to_numeric(rows[column], errors="coerce")


def metric_error(values: pd.Series, column: str) -> pd.Series:
    """The error of a stored metric that its tolerance bounds: |value|, or the signed excess
    value - reference for the one-sided metrics of :data:`EXCESS_OVER`.

    >>> import pandas as pd
    >>> metric_error(pd.Series([1.02, 0.97]), "cluster_cost_ratio").round(6).tolist(), metric_error(pd.Series([-0.2]), "obj_error").tolist()
    ([0.02, -0.03], [0.2])
    """
    import pandas as pd

    values = pd.to_numeric(values, errors="coerce")
    return values - EXCESS_OVER[column] if column in EXCESS_OVER else values.abs()


def saves_time(rows: pd.DataFrame) -> pd.Series:
    """Per row: faster end to end than the fair baseline (t_total < t_baseline), and for a warm start
    fewer simplex iterations than the cold solve (iterations_saved > 0 where recorded).

    >>> import pandas as pd
    >>> saves_time(pd.DataFrame({"t_total": [1.0, 3.0, 1.0], "t_baseline": [2.0, 2.0, 2.0],
    ...                          "iterations_saved": [None, None, -4]})).tolist()
    [True, False, False]
    """
    total, baseline, saved = _numbers(rows, "t_total"), _numbers(rows, "t_baseline"), _numbers(rows, "iterations_saved")
    return total.lt(baseline) & (saved.isna() | saved.gt(0))


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
        # objective metrics of a solved kind exist only when the original has an optimum
        applies &= orig_feasible | ~rows["kind"].isin(OPTIMIZATION_KINDS)
        values = metric_error(rows[column], column)
        # a checked metric that is missing where it applies is a failure, never a pass
        success &= ~applies | (values.le(tolerance) & values.notna())
    if predicate.faster:
        success &= ~rows["kind"].isin(TIMED_KINDS) | saves_time(rows)
    elif predicate.judges_points() and "exact" in rows:
        success &= ~rows["exact"].eq(True)  # solved the original: no answer of the reduction, and no time to judge it by
    covered = rows["kind"].map(predicate.covers).astype(bool)
    return success & covered


def record_frame(records: Sequence[Mapping[str, Any]], kind: Optional[str] = None, status: str = "ok") -> pd.DataFrame:
    """The frame :func:`evaluate` reads, from trial records (dicts of :mod:`calib.metrics` fields).

    One row per record, in order; a column per metric field of :data:`calib.metrics.FIELDS` (a field
    the record lacks is None, as :func:`calib.analysis.rows.load_rows` reads a stored row), then
    ``status`` and ``kind``: the record's own when it has them, else the given ones. Shape
    (len(records), 2 + len(FIELDS)). Costs O(len(records) x len(FIELDS)).
    """
    import pandas as pd

    rows = [{"status": record.get("status", status), "kind": record.get("kind", kind),
             **{name: record.get(name) for name in FIELDS}} for record in records]
    return pd.DataFrame.from_records(rows, columns=["status", "kind", *FIELDS])


def judge_records(records: Sequence[Mapping[str, Any]], predicate: Predicate, kind: Optional[str] = None,
                  status: str = "ok") -> list[bool]:
    """Success of each trial record under ``predicate``: :func:`evaluate` on :func:`record_frame`, the
    one path from records to verdicts (the k search, `calib probe` and the tests use it)."""
    return [bool(value) for value in evaluate(record_frame(records, kind, status), predicate).tolist()]
