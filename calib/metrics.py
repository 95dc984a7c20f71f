"""The one metrics record every trial produces, whatever the problem class.

A trial solves the original problem (cached per instance), projects it, solves the projected
problem, retrieves an original-space point with each retrieval method and measures it. Every row
of the store holds one :data:`FIELDS` record. Each field states which classes fill it and under
which condition; a field is ``None`` only where its entry says so (a class or retrieval that has no
such quantity, or a solve it depends on that did not succeed), never silently missing.
:func:`expected_fields` turns those statements into the set of fields a given record must fill.

Classes are written as space-separated tokens: a problem kind (``lp``, ``sdp``, ``qp``,
``points``, ``clustering``, ``milp``), ``all`` for every kind, or ``kind:retrieval`` for one retrieval of one kind.

Conditions (:data:`CONDITIONS`): ``always``; ``orig optimal`` / ``proj optimal`` / ``both optimal``
(the original / projected / both solves ended ``optimal``); ``orig verdict`` / ``proj verdict`` /
``both verdicts`` (the solver certified feasibility or infeasibility, see
:attr:`calib.solvers.result.SolveResult.feasible`); ``ratio defined`` (both optimal and the
original optimum is nonzero); ``max-cut`` / ``max-cut retrieved`` (a max-cut SDP, whose problem
carries its graph, with the original / both solves optimal: the record holds ``cut_original``);
``both partitioned`` (clustering: the original and the projected runs both returned a partition,
status ``optimal`` or ``stopped_on_iterations``).

The user's decision: ``obj_error``, ``feas_error`` and ``sign_violation`` judge the whole point a
retrieval returns; ``decision_error`` and ``cut_ratio`` judge the part a user acts on (the
decision variables, the cut), and ``lp:completion`` returns the projected decision completed
exactly (:mod:`calib.reduce.completion`), so its objective and feasibility errors are those of the
decision itself.

Scales (no constant 1: every error is relative to a size taken from the instance's own data, so
multiplying the objective, or the constraints, by any positive factor leaves every error and
verdict unchanged). The common rule is :func:`scale`: a reference value sets the scale unless it is
smaller than :data:`SCALE_FLOOR` times the size of its own terms at a reference point, where
cancellation makes it meaningless as a yardstick; the floor then takes over.

- objective (``obj_error``, ``proj_gap``; lp, sdp, qp): ``obj_scale`` = max(|f*|, SCALE_FLOOR *
  size(x*)), with f* the original optimum and size(x) the objective's size at x without
  cancellation: |c|^T |x| + |offset| for an LP or SDP (svec coordinates), 1/2 x^T Q x + |c|^T |x| +
  |offset| for a QP. Should that be 0 (x* = 0 and no offset), the retrieved point's size is used.
  A portfolio whose optimum is -0.21 keeps the scale 0.21: a retrieved value of -0.031 has
  obj_error 0.85, not 0.18.
- feasibility, lp, sdp and milp (the completed point): ||A x - b|| / max(||b||, SCALE_FLOOR * || |A| |x_ref| ||), with
  x_ref = x* when the original has an optimum, else the retrieved point (2-norms; |A| the
  entrywise absolute value).
- feasibility, qp: the largest violation of A x <= b, the finite bounds and the ball over
  max(||b||_inf, the largest finite bound, the radius, SCALE_FLOOR * || |A| |x_ref| ||_inf,
  SCALE_FLOOR * ||x_ref||_inf).
- cone (``sign_violation``): ||min(x, 0)|| / ||x|| (lp), ||X_-||_F / ||X||_F (sdp); 0 at x = 0.
  The share of the point lying outside the cone, scale-free by construction.

``obj_ratio`` = f(x) / f* is kept beside ``obj_error``: it needs no scale.

Direction of the projected bound: an LP or SDP whose constraints are aggregated is a relaxation
(its optimum is a lower bound), a QP restricted to x = T^T u is a restriction (an upper bound).
``proj_gap`` is measured in the direction the bound errs, so it is >= 0 (up to solver tolerance)
for every class and the analysis never needs to know which.
"""

from __future__ import annotations

import math
from typing import Any, NamedTuple, Optional

import numpy as np

KINDS = ("lp", "sdp", "qp", "points", "clustering", "milp")
#: the retrieval each kind runs when a spec names none (its handler's ``default_retrieval``, kept here
#: for the readers of tables that must not import the solvers)
DEFAULT_RETRIEVALS = {"lp": "completion", "sdp": "affine-psd", "qp": "lift", "points": "none", "clustering": "partition",
                      "milp": "completion"}


class Field(NamedTuple):
    """Documentation of one metric: meaning, units, classes that fill it, condition."""

    meaning: str
    units: str
    classes: str
    needs: str = "always"


_SOLVED = "lp sdp qp milp"
#: kinds with an original and a projected run (clustering: the same method on the original and projected points)
_RUN = _SOLVED + " clustering"
_ITERATIVE = "lp:alternating lp:restricted-repair lp:warm-start sdp:alternating"
_AFFINE = "lp:alternating sdp:affine sdp:affine-psd sdp:alternating"

#: field -> Field(meaning, units, classes that fill it, condition)
FIELDS: dict[str, Field] = {
    "orig_status": Field("status of the original solve (calib vocabulary, calib.solvers.result.STATUSES)", "-", _RUN),
    "orig_objective": Field("optimal value of the original problem", "objective units", _RUN, "orig optimal"),
    "orig_feasible": Field("the original problem is feasible (solver verdict)", "bool", _SOLVED, "orig verdict"),
    "proj_status": Field("status of the projected solve", "-", _RUN),
    "proj_message": Field("the solver's own status text for the projected solve", "-", _RUN),
    "proj_objective": Field("optimal value of the projected problem", "objective units", _RUN, "proj optimal"),
    "proj_feasible": Field("the projected problem is feasible (solver verdict)", "bool", _SOLVED, "proj verdict"),
    "proj_method": Field("the method of the projected solve (calib.solvers.methods)", "-", _RUN),
    "proj_gap": Field("gap of the projected bound in the direction it errs: (orig - proj) / obj_scale for a "
                      "relaxation (lp, sdp), (proj - orig) / obj_scale for a restriction (qp); >= 0 up to "
                      "solver tolerance", "ratio", _SOLVED, "both optimal"),
    "obj_scale": Field("the objective's scale: max(|orig|, SCALE_FLOOR * size of the objective at the original "
                       "optimum), see the module docstring", "objective units", _SOLVED, "orig optimal"),
    "feasibility_agrees": Field("the projected problem gets the original's feasibility verdict; False for a feasible "
                                "projection of an infeasible lp/sdp (the one-sided error of a relaxation) or an "
                                "infeasible restriction of a feasible qp", "bool", _SOLVED, "both verdicts"),
    "proj_iterations": Field("solver iterations on the projected problem", "count", _RUN),
    "obj_error": Field("|f(x_retrieved) - orig| / obj_scale", "ratio", _SOLVED, "both optimal"),
    "obj_ratio": Field("f(x_retrieved) / orig: 1 when the retrieved point is optimal; for a minimisation the "
                       "retrieved value is >= orig when feasible, so the ratio is >= 1 for orig > 0 and <= 1 for "
                       "orig < 0", "ratio", _SOLVED, "ratio defined"),
    "feas_error": Field("constraint violation of the retrieved point over the kind's feasibility scale (module "
                        "docstring): lp ||A x - b||, sdp ||A(X) - b|| (2-norms); qp largest violation of A x <= b, the "
                        "bounds and the ball", "ratio", _SOLVED, "proj optimal"),
    "sign_violation": Field("cone violation of the retrieved point: lp ||min(x, 0)|| / ||x||; sdp "
                            "||X_-||_F / ||X||_F with X_- the negative part of X (sum of its negative "
                            "eigenvalues times their eigenprojectors), which reduces to the lp formula for a "
                            "diagonal X", "ratio", "lp sdp", "proj optimal"),
    "decision_error": Field("distance of the user's decision at the retrieved point from the original optimum's, "
                            "||d(x) - d(x*)|| / ||d(x*)||: lp the decision variables of the LP's DecisionMap "
                            "(regression coefficients, servings, flows, the signal; calib.problems), qp the "
                            "variables x (a portfolio's weights). An LP with several optima can have a large "
                            "decision_error at an optimal point", "ratio", "lp qp", "both optimal"),
    "completion_shortfall": Field("share of the original's rows A x = b that the completed point misses (by more than "
                                  "1e-7 of the row's term size, calib.reduce.completion): rows whose decision part "
                                  "no completion can satisfy", "ratio", "lp:completion", "proj optimal"),
    "cut_original": Field("expected cut of random-hyperplane rounding (Goemans and Williamson 1995) of the "
                          "original SDP optimum rescaled to unit diagonal, sum_ij w_ij arccos(X_ij) / pi "
                          "(calib.reduce.rounding; max-cut SDPs: the problem carries its graph)", "edge weight",
                          "sdp", "max-cut"),
    "cut_ratio": Field("expected rounded cut of the retrieved matrix (made PSD, rescaled to unit diagonal) over "
                       "cut_original: the cut a user gets from the reduction against the one from the original SDP",
                       "ratio", "sdp", "max-cut retrieved"),
    "cut_gain_kept": Field("(cut(X) - sum(W)/4) / (cut_original - sum(W)/4): the share of the original rounding's gain "
                           "over a fair coin per node (which cuts half the edge weight, sum(W)/4 for symmetric W) that "
                           "the retrieved matrix keeps; on dense random graphs a coin already reaches ~90% of "
                           "cut_original, so cut_ratio alone flatters", "ratio", "sdp", "max-cut retrieved"),
    "retrieval_iterations": Field("iterations of the retrieval itself: alternating-projection rounds "
                                  "(lp:alternating, sdp:alternating); simplex iterations of the completion LP "
                                  "when its columns occur in several rows (lp:completion, else missing); simplex "
                                  "iterations summed over the "
                                  "restricted LPs (lp:restricted-repair); simplex iterations of the warm-started "
                                  "original solve (lp:warm-start)", "count", _ITERATIVE, "proj optimal"),
    "exact": Field("the retrieval returned the original's own optimum by solving the original (lp:warm-start "
                   "whose warm solve succeeded; lp:restricted-repair that widened to all columns): its success is "
                   "about saving time, never about error", "bool", "lp:restricted-repair lp:warm-start",
                   "proj optimal"),
    "columns_share": Field("share of the original's columns in the restricted LP finally solved", "ratio",
                           "lp:restricted-repair", "proj optimal"),
    "widening_rounds": Field("times the restricted column set was doubled before the restricted LP became "
                             "feasible (0: the projected basis sufficed)", "count", "lp:restricted-repair",
                             "proj optimal"),
    "iterations_saved": Field("simplex iterations of the cold original solve minus those of the solve warm-started "
                              "from the projected basis (negative: the warm start cost iterations)", "count",
                              "lp:warm-start", "proj optimal"),
    "warm_seconds_saved": Field("seconds of the cold simplex solve of the original (from the fair baseline) minus "
                                "those of the warm-started solve (negative: the warm start cost time; missing when "
                                "simplex is not a configured method)", "s", "lp:warm-start", "proj optimal"),
    "distortion_max": Field("worst pairwise |‖T(p-q)‖²/‖p-q‖² - 1| over the pairs checked", "ratio", "points"),
    "distortion_q99": Field("99th percentile (linear interpolation) of the pairwise distortion over the pairs "
                            "checked", "ratio", "points"),
    "pairs_checked": Field("number of point pairs the distortion was measured on (all pairs up to 10,000 points, "
                           "else the uniform sample of calib.reduce.points)", "count", "points"),
    "pairs_total": Field("number of all point pairs, n(n-1)/2: pairs_checked below it marks a sampled trial, whose "
                         "claim covers all but a bounded share of the pairs (calib.reduce.points.sampled_claim)",
                         "count", "points"),
    "rows_violated": Field("share of the original's rows that the completed point violates by more than 1e-9 of "
                           "max(1, |b_i|): the rows whose slack would be negative (kept at 0), calib.reduce.milp.complete_milp",
                           "ratio", "milp", "proj optimal"),
    "cluster_cost_ratio": Field("k-means cost on the original points of the partition found on the projected points, "
                                "over that of the partition found on the original points by the same method from the "
                                "same seeded starts (calib.reduce.clustering); below 1 when the projected run found the "
                                "better local optimum", "ratio", "clustering", "both partitioned"),
    "cluster_disagreement": Field("share of the points the projected partition assigns differently from the original "
                                  "one, up to relabelling (Hungarian matching of the contingency table)", "ratio",
                                  "clustering", "both partitioned"),
    "t_sketch": Field("draw T plus apply it to the data", "s", "all"),
    "t_solve_orig": Field("the original solve by the reference method (cached per instance, measured when it ran)",
                          "s", _RUN),
    "t_baseline": Field("the fair baseline: the original solved by the fastest configured method that reaches the "
                        "reference's verdict (calib.solvers.methods)", "s", _RUN),
    "t_solve_proj": Field("solve the projected problem", "s", _RUN),
    "t_retrieve": Field("this retrieval alone, including every extra solve it makes (the restricted LPs of "
                        "lp:restricted-repair, the warm-started original solve of lp:warm-start), without t_factor",
                        "s", _RUN, "proj optimal"),
    "t_factor": Field("factoring the affine set {x : A x = b} the retrieval projects onto (an SVD; 0 with LSQR), done "
                      "once per instance and reused by its later trials: the time it took when it was done",
                      "s", _AFFINE, "proj optimal"),
    "t_total": Field("end to end: t_sketch + t_solve_proj + t_retrieve + t_factor (t_retrieve and t_factor counted "
                     "as 0 when the projected solve failed and nothing was retrieved; t_factor counted once, as a "
                     "single solve pays it)", "s", _RUN),
    "time_saved": Field("t_baseline - t_total: wall time the projected pipeline with this retrieval saves against "
                        "the fair baseline (negative: it costs more)", "s", _RUN),
}

#: condition name -> predicate on a record (see the module docstring)
CONDITIONS = {
    "always": lambda rec: True,
    "orig optimal": lambda rec: rec.get("orig_status") == "optimal",
    "proj optimal": lambda rec: rec.get("proj_status") == "optimal",
    "both optimal": lambda rec: rec.get("orig_status") == "optimal" and rec.get("proj_status") == "optimal",
    "orig verdict": lambda rec: rec.get("orig_feasible") is not None,
    "proj verdict": lambda rec: rec.get("proj_feasible") is not None,
    "both verdicts": lambda rec: rec.get("orig_feasible") is not None and rec.get("proj_feasible") is not None,
    "both partitioned": lambda rec: (rec.get("orig_status") in ("optimal", "stopped_on_iterations")
                                     and rec.get("proj_status") in ("optimal", "stopped_on_iterations")),
    "ratio defined": lambda rec: (rec.get("orig_status") == "optimal" and rec.get("proj_status") == "optimal"
                                  and rec.get("orig_objective") not in (None, 0.0)),
    # a max-cut SDP carries its graph; the record shows it by its rounded original cut
    "max-cut": lambda rec: rec.get("orig_status") == "optimal" and rec.get("cut_original") is not None,
    "max-cut retrieved": lambda rec: (rec.get("proj_status") == "optimal" and rec.get("orig_status") == "optimal"
                                      and rec.get("cut_original") is not None),
}


def fills(name: str, kind: str, retrieval: str) -> bool:
    """True when ``FIELDS[name]`` says the class ``kind`` with ``retrieval`` fills it.

    >>> fills("widening_rounds", "lp", "restricted-repair"), fills("widening_rounds", "lp", "basis-lstsq")
    (True, False)
    >>> fills("t_sketch", "points", "none")
    True
    """
    tokens = FIELDS[name].classes.split()
    return "all" in tokens or kind in tokens or f"{kind}:{retrieval}" in tokens


def expected_fields(kind: str, retrieval: str, rec: dict) -> set:
    """Fields that ``rec`` (a record of class ``kind`` and ``retrieval``) must hold as non-None."""
    return {name for name, field in FIELDS.items() if fills(name, kind, retrieval) and CONDITIONS[field.needs](rec)}


#: a reference value is trusted as a scale down to this share of the size of its own terms
SCALE_FLOOR = 1e-3


def scale(reference: float, terms: float) -> float:
    """max(|reference|, SCALE_FLOOR * terms): the scale rule of the module docstring.

    >>> scale(-0.21, 0.63), scale(0.0, 50.0)
    (0.21, 0.05)
    """
    return max(abs(float(reference)), SCALE_FLOOR * float(terms))


def relative(difference: float, scale_value: float) -> Optional[float]:
    """|difference| / scale_value; 0 when the difference is 0, None when it is not finite or the scale is 0.

    >>> relative(-0.179, 0.21) == 0.179 / 0.21, relative(0.0, 0.0), relative(1.0, 0.0)
    (True, 0.0, None)
    """
    difference = abs(float(difference))
    if difference == 0.0:
        return 0.0
    if not (math.isfinite(difference) and scale_value > 0 and math.isfinite(scale_value)):
        return None
    return difference / float(scale_value)


def clean(value: Any) -> Any:
    """JSON-safe value: numpy scalars to Python, non-finite floats to None (other values unchanged).

    >>> clean(np.float32(0.5)), clean(np.int64(3)), clean(np.bool_(True)), clean(float("inf")), clean("x")
    (0.5, 3, True, None, 'x')
    """
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    return value


def record(**values: Any) -> dict:
    """A complete metrics record: every field of :data:`FIELDS`, missing ones as None."""
    unknown = set(values) - set(FIELDS)
    if unknown:
        raise KeyError(f"unknown metric fields: {sorted(unknown)}")
    return {name: clean(values.get(name)) for name in FIELDS}
