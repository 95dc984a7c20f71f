"""Integer programs: the standard form with slacks, HiGHS MIP, the completion, the row projection;
optima against HiGHS run directly through highspy (on the inequality model, no slacks) and
against enumeration."""

from __future__ import annotations

import itertools

import highspy
import numpy as np
import pytest
import scipy.sparse as sp

from calib import projectors
from calib.families import get
from calib.problems.milp import from_inequalities
from calib.reduce import HANDLERS
from calib.reduce.milp import complete_milp, violated_rows
from calib.solvers.milp import MIP_OPTIONS, solve_milp
from reduce_helpers import SOLVER, OrthogonalProjector, instance

GAP = MIP_OPTIONS["mip_rel_gap"]  # HiGHS stops within this relative gap of its dual bound


def _inequality_data(problem):
    """(costs, rows, right-hand sides, upper bounds) of the decision columns, read back from the standard form."""
    n = problem.n_decision
    return problem.c[:n], sp.csr_array(problem.A)[:, :n].toarray(), problem.b, problem.upper[:n]


def _highspy_optimum(costs, rows, rhs, upper, sense: str) -> float:
    # The reference: the inequality model built directly in highspy (no slacks, integers by
    # changeColsIntegrality), solved by HiGHS with its defaults.
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("threads", 1)
    n = len(costs)
    h.addVars(n, np.zeros(n), upper)
    h.changeColsCost(n, np.arange(n, dtype=np.int32), costs)
    h.changeColsIntegrality(n, np.arange(n, dtype=np.int32), np.full(n, highspy.HighsVarType.kInteger))
    for row, bound in zip(rows, rhs):
        index = np.flatnonzero(row).astype(np.int32)
        low, high = (-highspy.kHighsInf, bound) if sense == "<=" else (bound, highspy.kHighsInf)
        h.addRow(low, high, index.size, index, row[index])
    h.run()
    assert h.getModelStatus() == highspy.HighsModelStatus.kOptimal
    return h.getInfo().objective_function_value


@pytest.mark.parametrize("name, params, sense", [
    ("milp-knapsack", {"constraints": 30, "items": 12}, "<="),
    ("milp-cover", {"elements": 40, "sets": 25, "density": 0.15, "demand": 3, "upper": 3}, ">="),
])
def test_original_optimum_is_highspys_on_the_inequality_model(name, params, sense):
    problem = instance(name, params).problem
    ours = solve_milp(problem)
    assert ours.status == "optimal"
    theirs = _highspy_optimum(*_inequality_data(problem), sense)
    assert ours.objective == pytest.approx(theirs, rel=2 * GAP)
    # its point is integral, within the bounds and satisfies every row exactly once completed
    z = complete_milp(problem, ours.x)
    assert np.abs(problem.residual(z)).max() <= 1e-9 * np.abs(problem.b).max() and violated_rows(problem, z) == 0.0


def _enumerated(problem, sense: str) -> float:
    costs, rows, rhs, upper = _inequality_data(problem)
    best = np.inf
    for x in itertools.product(*(range(int(u) + 1) for u in upper)):
        activity = rows @ np.asarray(x, dtype=float)
        if np.all(activity <= rhs + 1e-9) if sense == "<=" else np.all(activity >= rhs - 1e-9):
            best = min(best, float(costs @ np.asarray(x, dtype=float)))
    return best


def test_tiny_knapsack_and_cover_by_enumeration():
    # every 0/1 choice of 8 items (256) and every 0..2 purchase of 5 sets (243), checked against the rows
    knapsack = instance("milp-knapsack", {"constraints": 3, "items": 8}).problem
    cover = instance("milp-cover", {"elements": 6, "sets": 5, "density": 0.4}).problem
    for problem, sense in ((knapsack, "<="), (cover, ">=")):
        best = _enumerated(problem, sense)
        assert solve_milp(problem).objective == pytest.approx(best, rel=GAP, abs=1e-9)


def test_completion_recomputes_each_slack_from_its_row():
    # x W <= c with one violated row: the slack of a satisfied row is c_i - w_i x, the violated row's
    # slack stays 0 and its residual is the violation w_i x - c_i
    problem = from_inequalities([-1.0, -1.0, -1.0], [[1.0, 2.0, 0.0], [0.0, 1.0, 1.0]], [4.0, 1.0], "<=",
                                [1.0, 1.0, 1.0], [True, True, True])
    z = complete_milp(problem, np.array([1.0, 1.0, 0.9999999, 5.0, 5.0]))  # the integer 1 within tolerance
    np.testing.assert_array_equal(z, [1.0, 1.0, 1.0, 1.0, 0.0])
    np.testing.assert_array_equal(problem.residual(z), [0.0, 1.0])
    assert violated_rows(problem, z) == 0.5


def test_projection_to_all_rows_by_an_orthogonal_matrix_keeps_the_optimum():
    # T orthogonal (k = m): T A z = T b has the same solutions as A z = b, so the projected MIP is the original
    built = instance("milp-knapsack", {"constraints": 20, "items": 10})
    handler = HANDLERS["milp"]
    original = handler.solve_original(built.problem, SOLVER)
    T = OrthogonalProjector(20, 20, np.random.default_rng(1))
    (rec,) = handler.trial_records(built.problem, original, T, ["completion"], SOLVER)
    assert rec["proj_status"] == "optimal" and rec["obj_error"] <= 2 * GAP
    assert rec["rows_violated"] == 0.0 and rec["feas_error"] <= 1e-9


def test_below_half_the_rows_the_slack_columns_make_the_projected_rows_vacuous():
    # Wendel (1962): 120 symmetric random vectors in R^30 lie in one half-space with probability
    # 2^-119 sum_{i<30} C(119, i) < 1e-7, so the Gaussian slack columns of T span R^30 positively and
    # the projected knapsack takes every item; its completion then violates rows, and the projected
    # optimum is a valid (relaxation) but useless bound
    built = instance("milp-knapsack", {"constraints": 120, "items": 10})
    handler = HANDLERS["milp"]
    original = handler.solve_original(built.problem, SOLVER)
    T = projectors.make("gaussian", 30, 120, np.random.default_rng(2))
    reduced = handler.reduce(built.problem, T)
    projected = handler.solve_reduced(reduced, SOLVER)
    assert projected.status == "optimal"
    np.testing.assert_array_equal(np.round(projected.x[:10]), np.ones(10))
    (rec,) = handler.trial_records(built.problem, original, T, ["completion"], SOLVER)
    assert rec["proj_gap"] > 0.5 and rec["rows_violated"] > 0.5 and rec["proj_objective"] <= rec["orig_objective"]


def test_families_are_deterministic_and_checked():
    family = get("milp-cover")
    params = family.resolve({"elements": 30, "sets": 10}, "test")
    one, two = (family.make(params, 0, np.random.default_rng(5)).problem for _ in range(2))
    assert (one.A != two.A).nnz == 0 and np.array_equal(one.b, two.b) and np.array_equal(one.c, two.c)
    assert family.n_points(params) == 10 + 30 + 1 and family.projected_dim(params) == 30
    # every element is covered by some set, so buying every set `upper` times is feasible
    assert np.all(sp.csr_array(one.A)[:, :10].sum(axis=1) >= 1)
    from calib.errors import InputError

    with pytest.raises(InputError, match="upper"):
        family.resolve({"elements": 30, "sets": 10, "demand": 3, "upper": 2}, "test")
