"""QP adapters: HiGHS (linear constraints) and SCS (with the ball), against published optima.

SCS tolerances in this file: eps_abs = eps_rel = 1e-7 (eps_infeas = 1e-7, the adapter default);
SCS objectives are compared at relative tolerance 1e-5 (two orders above the stopping tolerance,
which bounds the objective error by O(eps) times the data scale). HiGHS's QP solver is an active-set
method run with Hessian regularisation 1e-10 (the adapter's setting): objectives are compared at
1e-9 absolute, points at 1e-7.
"""

import numpy as np
import pytest

from calib.errors import InputError
from calib.families import get
from calib.problems.qp import QP
from calib.solvers.qp import solve_qp, solve_qp_highs, solve_qp_scs

TIGHT = {"eps_abs": 1e-7, "eps_rel": 1e-7}
SCS_RTOL = 1e-5


def hs21() -> QP:
    # Hock & Schittkowski (1981), "Test examples for nonlinear programming codes", problem 21:
    # min 0.01 x1^2 + x2^2 - 100 s.t. 10 x1 - x2 >= 10, 2 <= x1 <= 50, -50 <= x2 <= 50;
    # f* = -99.96 at x* = (2, 0). (Data checked against the CUTEst SIF file of HS21.)
    return QP(Q=np.diag([0.02, 2.0]), c=np.zeros(2), A=[[-10.0, 1.0]], b=[-10.0],
              lower=[2.0, -50.0], upper=[50.0, 50.0], offset=-100.0, name="hs21").validate()


def hs35() -> QP:
    # Hock & Schittkowski (1981), problem 35:
    # min 9 - 8x1 - 6x2 - 4x3 + 2x1^2 + 2x2^2 + x3^2 + 2x1x2 + 2x1x3 s.t. x1 + x2 + 2x3 <= 3, x >= 0;
    # f* = 1/9 at x* = (4/3, 7/9, 4/9).
    Q = np.array([[4.0, 2.0, 2.0], [2.0, 4.0, 0.0], [2.0, 0.0, 2.0]])
    return QP(Q=Q, c=[-8.0, -6.0, -4.0], A=[[1.0, 1.0, 2.0]], b=[3.0], lower=np.zeros(3), offset=9.0,
              name="hs35").validate()


def test_hs21_through_highs():
    result = solve_qp_highs(hs21())
    assert result.status == "optimal" and result.solver == "highs-qp"
    assert result.objective == pytest.approx(-99.96, abs=1e-9)
    np.testing.assert_allclose(result.x, [2.0, 0.0], atol=1e-7)


def test_hs35_through_highs_and_its_multiplier():
    result = solve_qp_highs(hs35())
    assert result.status == "optimal"
    assert result.objective == pytest.approx(1.0 / 9.0, abs=1e-9)
    np.testing.assert_allclose(result.x, [4 / 3, 7 / 9, 4 / 9], atol=1e-6)
    # KKT at x*, derived by hand: grad f(x*) = (-2/9, -2/9, -4/9) = -lambda (1, 1, 2) gives lambda = 2/9.
    assert result.dual[0] == pytest.approx(2.0 / 9.0, abs=1e-6)


@pytest.mark.parametrize("problem, optimum", [(hs21, -99.96), (hs35, 1.0 / 9.0)])
def test_scs_agrees_on_the_hock_schittkowski_problems(problem, optimum):
    result = solve_qp_scs(problem(), settings=TIGHT)
    assert result.status == "optimal"
    assert result.objective == pytest.approx(optimum, rel=SCS_RTOL, abs=SCS_RTOL)


def _family(name, seed=0, **params):
    family = get(name)
    instance = family.make(family.resolve(params, name), 0, np.random.default_rng(seed))
    return instance.problem.validate(), instance.info


def _min_variance_qp(covariance, lower):
    n = covariance.shape[0]
    return QP(Q=2.0 * covariance, c=np.zeros(n), A=np.vstack([np.ones(n), -np.ones(n)]), b=[1.0, -1.0],
              lower=np.full(n, lower)).validate()


def test_minimum_variance_portfolio_matches_the_closed_form():
    # Merton (1972), "An analytic derivation of the efficient portfolio frontier", JFQA 7(4):
    # min w' S w s.t. 1'w = 1 has w* = S^-1 1 / (1' S^-1 1). With w >= 0 added, the same w* solves
    # the problem whenever it is nonnegative; otherwise the constrained variance is strictly larger.
    nonnegative_cases = 0
    for seed in range(10):
        _, info = _family("qp-portfolio", seed=seed, assets=6)
        covariance = info["covariance"]
        closed = np.linalg.solve(covariance, np.ones(6))
        closed /= closed.sum()
        free = solve_qp_highs(_min_variance_qp(covariance, -np.inf))
        np.testing.assert_allclose(free.x, closed, atol=1e-7)
        long_only = solve_qp_highs(_min_variance_qp(covariance, 0.0))
        assert long_only.status == "optimal"
        if np.all(closed >= 0):
            nonnegative_cases += 1
            np.testing.assert_allclose(long_only.x, closed, atol=1e-7)
        else:
            assert long_only.x @ covariance @ long_only.x > closed @ covariance @ closed
    assert nonnegative_cases > 0  # the fixed seeds do exercise the nonnegative case


def test_portfolio_family_solves_with_both_solvers_and_respects_its_limits():
    qp, info = _family("qp-portfolio", seed=4, assets=30, sectors=5, factors=3)
    assert qp.violation(info["planted_x"]) <= 1e-12  # equal weights are feasible by construction
    highs = solve_qp_highs(qp)
    scs_result = solve_qp_scs(qp, settings=TIGHT)
    assert highs.status == scs_result.status == "optimal"
    assert scs_result.objective == pytest.approx(highs.objective, rel=SCS_RTOL, abs=SCS_RTOL)  # common practice
    assert qp.violation(highs.x) <= 1e-7
    assert highs.x.sum() == pytest.approx(1.0, abs=1e-9)
    assert highs.objective <= qp.objective(info["planted_x"]) + 1e-9


def test_ball_inactive_scs_matches_highs():
    qp, _ = _family("qp-random", seed=5, vars=20, rows=30)
    assert not qp.has_ball
    reference = solve_qp_highs(qp)
    assert reference.status == "optimal"
    qp.radius = 2.0 * np.linalg.norm(reference.x)  # the ball does not cut the optimum off
    result = solve_qp(qp, options=TIGHT)
    assert result.solver == "scs" and result.status == "optimal"
    assert result.objective == pytest.approx(reference.objective, rel=SCS_RTOL)
    np.testing.assert_allclose(result.dual, reference.dual, atol=1e-4)  # the same KKT multipliers


def test_ball_active_linear_objective_closed_form():
    # Cauchy–Schwarz: min c'x s.t. ||x|| <= r is -r ||c||, at x = -r c / ||c||; with ||B x|| <= r and
    # B invertible, substitute y = B x: -r ||B^-T c|| (common practice).
    rng = np.random.default_rng(6)
    c, r = rng.standard_normal(8), 1.5
    result = solve_qp_scs(QP(Q=np.zeros((8, 8)), c=c, radius=r).validate(), settings=TIGHT)
    assert result.status == "optimal"
    assert result.objective == pytest.approx(-r * np.linalg.norm(c), rel=SCS_RTOL)
    np.testing.assert_allclose(result.x, -r * c / np.linalg.norm(c), atol=1e-4)
    B = rng.standard_normal((8, 8)) + 4 * np.eye(8)
    mapped = solve_qp_scs(QP(Q=np.zeros((8, 8)), c=c, radius=r, ball_map=B).validate(), settings=TIGHT)
    assert mapped.objective == pytest.approx(-r * np.linalg.norm(np.linalg.solve(B.T, c)), rel=SCS_RTOL)


def test_random_qp_with_ball_stays_inside_it():
    qp, info = _family("qp-random", seed=7, vars=15, rows=25, radius=0.8)
    assert qp.has_ball and qp.violation(info["planted_x"]) == 0.0
    result = solve_qp(qp, options=TIGHT)
    assert result.status == "optimal"
    assert qp.ball_norm(result.x) <= qp.radius * (1 + 1e-5)
    assert result.objective <= qp.objective(info["planted_x"]) + 1e-6


def test_infeasible_qp_is_a_result_for_both_solvers():
    # 1 <= x <= ... with the row x <= 0 has no solution (by inspection).
    qp = QP(Q=np.eye(1), c=[0.0], A=[[1.0]], b=[0.0], lower=[1.0]).validate()
    assert solve_qp_highs(qp).status == "infeasible"
    assert solve_qp_scs(qp, settings=TIGHT).status == "infeasible"


def test_highs_refuses_the_ball():
    with pytest.raises(InputError, match="ball"):
        solve_qp_highs(QP(Q=np.eye(2), c=np.ones(2), radius=1.0))
