"""Usable-answer success per retrieval, scale invariance of the errors, exact retrievals judged on time."""

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import linprog, minimize

from calib import projectors
from calib.metrics import SCALE_FLOOR, record
from calib.problems.qp import QP
from calib.reduce.base import Context
from calib.reduce.lp import LPHandler
from calib.reduce.qp import QPHandler, ReducedQP
from calib.solvers.result import SolveResult
from calib.verdicts.success import PRESETS, evaluate, judge_records, make_predicate, saves_time
from reduce_helpers import SOLVER, instance


def _verdicts(records, predicate, kind="lp"):
    return judge_records(records, predicate, kind)


def _scaled_qp(qp: QP, factor: float) -> QP:
    return QP(Q=qp.Q * factor, c=qp.c * factor, A=qp.A, b=qp.b, lower=qp.lower, upper=qp.upper,
              offset=qp.offset * factor, name=f"{qp.name}*{factor:g}")


def _point_keeping(qp: QP, x_star: np.ndarray, f_star: float, share: float) -> np.ndarray:
    """t x* with f(t x*) = share * f*: the root in (0, 1) of a t^2 + b t = share f*, a = 1/2 x*^T Q x*, b = c^T x*."""
    a, b = 0.5 * float(x_star @ (qp.Q @ x_star)), float(qp.c @ x_star)
    t = (-b - np.sqrt(b * b + 4 * a * share * f_star)) / (2 * a)
    return t * x_star


def test_portfolio_keeping_15_percent_fails_below_085_at_every_objective_scale():
    # A portfolio whose retrieved objective keeps 15% of the optimum (obj_ratio 0.148) has the relative
    # objective error 1 - 0.148 = 0.852 against the optimum's own magnitude: not a success at any tolerance
    # below 0.85, whether the objective is multiplied by 1e-3, 1 or 1e3 (scale invariance). The optimum is
    # checked against scipy.optimize.minimize (SLSQP) on the same data (outside reference).
    base = instance("qp-portfolio", {"assets": 30}).problem
    solved = QPHandler.solve_original(base, SOLVER)
    cons = [{"type": "ineq", "fun": lambda w: base.b - base.A @ w}]
    ref = minimize(base.objective, np.full(base.n_vars, 1.0 / base.n_vars), method="SLSQP", constraints=cons,
                   bounds=list(zip(base.lower, base.upper)), options={"ftol": 1e-14, "maxiter": 500})
    assert solved.ok and solved.objective == pytest.approx(ref.fun, rel=1e-5)
    assert -1.0 < solved.objective < 0.0  # a small optimum: the case a max(1, |f*|) denominator got wrong
    for factor in (1e-3, 1.0, 1e3):
        # the scaled problem has the same minimiser; its optimum is factor * f* (solver tolerances aside)
        qp = _scaled_qp(base, factor)
        original = SolveResult("optimal", "scaled", 0, "", objective=factor * solved.objective, x=solved.x)
        f_star = original.objective
        x = _point_keeping(qp, original.x, f_star, 0.148)
        reduced = ReducedQP(qp, np.eye(qp.n_vars))
        projected = SolveResult("optimal", "test", 0, "", objective=qp.objective(x), x=x)
        obj_scale = QPHandler.objective_scale(qp, original)
        values = QPHandler._retrieve(Context(qp, original, reduced, projected, SOLVER), "lift", obj_scale)
        assert values["obj_ratio"] == pytest.approx(0.148, rel=1e-9)
        assert values["obj_error"] == pytest.approx(0.852, rel=1e-6)  # scale = |f*|: SCALE_FLOOR * size < |f*| here
        assert SCALE_FLOOR * QPHandler.objective_size(qp, original.x) < abs(f_star)
        row = record(orig_status="optimal", proj_status="optimal", **values)
        assert [_verdicts([row], make_predicate("usable", obj=tol), "qp")[0] for tol in (0.05, 0.2, 0.5, 0.849)] == [False] * 4
        assert _verdicts([row], make_predicate("usable", obj=0.86), "qp") == [values["feas_error"] <= 0.05]


@pytest.mark.parametrize("factor", [1e-3, 1e3])
def test_multiplying_the_lp_objective_leaves_every_error_and_verdict_unchanged(factor):
    # Scale invariance (common practice for relative errors): c -> factor * c changes no feasible set and
    # no optimal point, so every error (relative to the objective's own scale) and every verdict must stay.
    lp = instance("lp-planted", {"rows": 12, "cols": 24}, index=1).problem
    scaled = type(lp)(c=lp.c * factor, A=lp.A, b=lp.b, offset=lp.offset * factor, name="scaled")
    rows = {}
    for label, problem in (("base", lp), ("scaled", scaled)):
        original = LPHandler.solve_original(problem, SOLVER)
        rows[label] = LPHandler.trial_records(problem, original, projectors.make("gaussian", 8, problem.n_rows, 5),
                                              ["basis-lstsq", "alternating", "restricted-repair"], SOLVER)
    for base, other in zip(rows["base"], rows["scaled"]):
        for name in ("obj_error", "proj_gap", "feas_error", "sign_violation", "obj_ratio"):
            assert other[name] == pytest.approx(base[name], rel=1e-6, abs=1e-9), name
        assert other["exact"] == base["exact"]
        # wall times differ between any two solves; an exact retrieval's verdict rests on them, so both
        # sides get the same clock here and only the scale of the errors is under test
        other.update({name: base[name] for name in ("t_total", "t_baseline", "iterations_saved")})
    for preset in ("usable", "bound"):
        assert _verdicts(rows["base"], PRESETS[preset]) == _verdicts(rows["scaled"], PRESETS[preset])


def test_basis_lstsq_and_alternating_get_their_own_verdicts_on_one_projected_solve():
    # A fixed small LP (lp-planted 12 x 24, instance 1) and one Gaussian draw (k = 8, seed 5): the same
    # projected solve, two retrievals. basis-lstsq's point misses A x = b by 17% and the objective by 14%;
    # the alternating retrieval lands on {A x = b} with a sign violation near 1e-7 and a 2.6% objective
    # error. Errors are recomputed here from the points' definitions with the optimum of scipy's linprog
    # (outside reference), not read from calib's records alone.
    lp = instance("lp-planted", {"rows": 12, "cols": 24}, index=1).problem
    original = LPHandler.solve_original(lp, SOLVER)
    reference = linprog(lp.c, A_eq=lp.A, b_eq=lp.b, bounds=(0, None), method="highs-ds")
    assert original.objective == pytest.approx(reference.fun + lp.offset, rel=1e-9)
    T = projectors.make("gaussian", 8, lp.n_rows, 5)
    lstsq, alternating = LPHandler.trial_records(lp, original, T, ["basis-lstsq", "alternating"], SOLVER)
    assert lstsq["proj_gap"] == alternating["proj_gap"]  # one projected solve: `bound` cannot tell them apart
    assert _verdicts([lstsq, alternating], PRESETS["usable"]) == [False, True]
    assert _verdicts([lstsq, alternating], PRESETS["bound"])[0] == _verdicts([lstsq, alternating], PRESETS["bound"])[1]
    f_star = reference.fun + lp.offset
    for row in (lstsq, alternating):
        assert row["obj_scale"] == pytest.approx(abs(f_star), rel=1e-9)  # the floor is far below |f*| here
    assert lstsq["feas_error"] > 0.1 and lstsq["obj_error"] > 0.1
    assert alternating["feas_error"] < 1e-12 and alternating["obj_error"] < 0.05 and alternating["sign_violation"] < 1e-6


def _exact_row(**values):
    row = {"orig_status": "optimal", "proj_status": "optimal", "obj_error": 0.0, "feas_error": 0.0,
           "sign_violation": 0.0, "exact": True, "t_total": 1.0, "t_baseline": 2.0, "iterations_saved": None}
    return {**record(**{**row, **values}), "status": "ok", "kind": "lp"}


def test_restricted_repair_widened_to_all_columns_is_no_success_without_saving_time():
    # lp-planted 12 x 14 at k = 2: the projected basis holds at most 2 columns and the doubling rounds give
    # 4, 8 and then all 14 columns (8 columns cannot meet 12 generic equalities), so the restricted LP ends
    # as the original LP itself (marked exact). Its zero error alone must not make it a usable or policy
    # success: only time saved does, under the policy preset; the time-free usable preset counts it a failure.
    lp = instance("lp-planted", {"rows": 12, "cols": 14}, index=1).problem
    original = LPHandler.solve_original(lp, SOLVER)
    widened = None
    for seed in range(20):
        row = LPHandler.trial_records(lp, original, projectors.make("gaussian", 2, lp.n_rows, seed), ["restricted-repair"],
                                      SOLVER)[0]
        if row["columns_share"] == 1.0:
            widened = row
            break
    assert widened is not None and widened["exact"] is True and widened["widening_rounds"] >= 1
    assert widened["obj_error"] == pytest.approx(0.0, abs=1e-9)
    slow = {**widened, "t_baseline": widened["t_total"] / 2}
    fast = {**widened, "t_baseline": widened["t_total"] * 2}
    assert _verdicts([slow, fast], PRESETS["policy"]) == [False, True]
    assert _verdicts([slow, fast], PRESETS["usable"]) == [False, False]  # no answer of its own, whatever the clock


def test_warm_start_with_more_iterations_than_the_cold_solve_is_not_a_saving():
    # Even when the end-to-end clock happens to come out lower, a warm start that took more simplex
    # iterations than the cold solve saved nothing (iterations_saved < 0).
    rows = pd.DataFrame([_exact_row(iterations_saved=-3), _exact_row(iterations_saved=0), _exact_row(iterations_saved=12)])
    assert saves_time(rows).tolist() == [False, False, True]
    assert evaluate(rows, PRESETS["policy"]).tolist() == [False, False, True]
    assert evaluate(rows, PRESETS["usable"]).tolist() == [False, False, False]


def test_policy_requires_faster_and_bound_keeps_its_reading():
    # The policy preset is usable AND faster; --faster adds the cost condition to any preset.
    rows = pd.DataFrame([_exact_row(exact=False, t_total=3.0), _exact_row(exact=False, t_total=1.0)])
    assert evaluate(rows, PRESETS["usable"]).tolist() == [True, True]
    assert evaluate(rows, PRESETS["policy"]).tolist() == [False, True]
    bound = pd.DataFrame([_exact_row(exact=False, t_total=3.0, proj_gap=0.01)])
    assert evaluate(bound, PRESETS["bound"]).tolist() == [True]
    assert evaluate(bound, make_predicate("bound", faster=True)).tolist() == [False]
