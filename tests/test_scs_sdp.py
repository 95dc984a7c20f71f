"""SCS adapter for standard-form SDPs, checked against published SDP values.

SCS tolerances in this file: eps_abs = eps_rel = 1e-7 (eps_infeas = 1e-7, the adapter default).
Published values below are quoted from memory of the cited papers.
Objectives are compared at relative tolerance 1e-5, two orders above the stopping tolerance: SCS
stops when its residuals and duality gap are below eps_abs + eps_rel * scale, which bounds the
objective error by O(eps) times the data scale.
"""

from itertools import combinations, product

import numpy as np
import pytest
import scs

from calib.families import get
from calib.problems.sdp import StandardSDP
from calib.solvers.result import STATUSES
from calib.solvers.scs_base import STATUS_TABLE
from calib.solvers.scs_sdp import primal_matrix, solve_sdp

TIGHT = {"eps_abs": 1e-7, "eps_rel": 1e-7}
RTOL = 1e-5


def _family_sdp(name, seed=0, **params):
    family = get(name)
    instance = family.make(family.resolve(params, name), 0, np.random.default_rng(seed))
    return instance.problem.validate(), instance.info


def _sdp_value(name, **params):
    """Optimal value of the max-cut / theta maximisation (the families store min of its negative)."""
    sdp, info = _family_sdp(name, **params)
    result = solve_sdp(sdp, settings=TIGHT)
    assert result.status == "optimal", result.solver_message
    return -result.objective, info


def test_two_by_two_worked_example():
    # Worked example of the SCS documentation (Racket binding, "Semidefinite program"):
    # min trace X s.t. X_10 = 1, X PSD has optimum X = [[1, 1], [1, 1]], value 2.
    sdp = StandardSDP.from_matrices(np.eye(2), [np.array([[0.0, 0.5], [0.5, 0.0]])], [1.0]).validate()
    result = solve_sdp(sdp, settings=TIGHT)
    assert result.status == "optimal"
    assert result.objective == pytest.approx(2.0, rel=RTOL)
    np.testing.assert_allclose(primal_matrix(result), np.ones((2, 2)), atol=1e-5)


def test_theta_of_c5_is_sqrt5():
    # Lovász (1979), "On the Shannon capacity of a graph", IEEE Trans. Inf. Theory 25(1): theta(C5) = sqrt(5).
    value, _ = _sdp_value("sdp-theta", graph="cycle", nodes=5)
    assert value == pytest.approx(np.sqrt(5.0), rel=RTOL)


@pytest.mark.parametrize("nodes", [7, 9])
def test_theta_of_odd_cycles(nodes):
    # Lovász (1979): theta(C_n) = n cos(pi/n) / (1 + cos(pi/n)) for odd n.
    value, _ = _sdp_value("sdp-theta", graph="cycle", nodes=nodes)
    cos = np.cos(np.pi / nodes)
    assert value == pytest.approx(nodes * cos / (1.0 + cos), rel=RTOL)


def test_theta_of_petersen_is_4():
    # Lovász (1979): theta(Petersen) = 4 (the graph is vertex-transitive with independence number 4).
    value, _ = _sdp_value("sdp-theta", graph="petersen", nodes=10)
    assert value == pytest.approx(4.0, rel=RTOL)


@pytest.mark.parametrize("nodes", [4, 7])
def test_theta_of_complete_graph_is_1(nodes):
    # Lovász (1979), sandwich theorem alpha(K_n) = 1 <= theta(K_n) <= chi(complement) = 1.
    value, _ = _sdp_value("sdp-theta", graph="complete", nodes=nodes)
    assert value == pytest.approx(1.0, rel=RTOL)


def _independence_number(nodes, edges):
    edge_set = {tuple(e) for e in edges.tolist()}
    for size in range(nodes, 0, -1):
        for subset in combinations(range(nodes), size):
            if not any(pair in edge_set for pair in combinations(subset, 2)):
                return size
    return 0


def test_theta_bounds_the_independence_number_of_a_random_graph():
    # Lovász (1979), the bound alpha(G) <= theta(G); alpha by brute force on 9 nodes.
    value, info = _sdp_value("sdp-theta", graph="random", nodes=9, edge_prob=0.4)
    assert _independence_number(9, info["edges"]) <= value * (1 + RTOL)


def test_maxcut_sdp_of_c5():
    # Goemans & Williamson (1995), J. ACM 42(6): the SDP bound of the 5-cycle is (25 + 5 sqrt 5)/8.
    value, _ = _sdp_value("sdp-maxcut", graph="cycle", nodes=5)
    assert value == pytest.approx((25.0 + 5.0 * np.sqrt(5.0)) / 8.0, rel=RTOL)


@pytest.mark.parametrize("nodes", [4, 7])
def test_maxcut_sdp_of_complete_graph(nodes):
    # Goemans & Williamson (1995): the SDP bound of K_n is n^2/4.
    value, _ = _sdp_value("sdp-maxcut", graph="complete", nodes=nodes)
    assert value == pytest.approx(nodes**2 / 4.0, rel=RTOL)


def test_maxcut_sdp_brackets_the_true_cut_of_a_random_graph():
    # Goemans & Williamson (1995), performance guarantee: 0.87856 * SDP <= max-cut <= SDP;
    # max-cut by brute force over all 2^9 cuts of a 10-node graph.
    value, info = _sdp_value("sdp-maxcut", graph="random", nodes=10, edge_prob=0.5)
    edges = info["edges"]
    best = max(int(np.sum(np.r_[0, side][edges[:, 0]] != np.r_[0, side][edges[:, 1]]))
               for side in product([0, 1], repeat=9))
    assert 0.87856 * value <= best <= value * (1 + RTOL)


def test_planted_sdp_solves_within_its_weak_duality_bracket():
    # Weak duality (Vandenberghe & Boyd, "Semidefinite programming", SIAM Review 38(1), 1996):
    # b^T y0 <= optimum <= <C, X0> for the planted dual-feasible y0 and primal-feasible X0.
    for params in ({"order": 6, "constraints": 10}, {"order": 8, "constraints": 20, "density": 0.3, "rank": 0.5}):
        sdp, info = _family_sdp("sdp-planted", seed=3, **params)
        result = solve_sdp(sdp, settings=TIGHT)
        assert result.status == "optimal", result.solver_message
        low, high = info["objective_bounds"]
        scale = RTOL * max(1.0, abs(result.objective))
        assert low - scale <= result.objective <= high + scale
        # the returned point and multipliers are feasible at the solver's accuracy
        assert np.linalg.eigvalsh(primal_matrix(result))[0] >= -1e-8
        assert np.abs(sdp.residual(result.x)).max() <= 1e-5 * max(1.0, np.abs(sdp.b).max())
        assert np.linalg.eigvalsh(sdp.dual_slack(result.dual))[0] >= -1e-5
        # strong duality at the optimum (Vandenberghe & Boyd 1996; Slater's condition holds)
        assert sdp.b @ result.dual == pytest.approx(result.objective, rel=RTOL)


@pytest.mark.parametrize("seed", [0, 1])
def test_certified_infeasible_sdp_is_reported_infeasible(seed):
    sdp, info = _family_sdp("sdp-infeasible", seed=seed, order=6, constraints=12)
    # the planted certificate is valid (theorem of alternatives, Vandenberghe & Boyd 1996)
    y0 = info["infeasibility_certificate"]
    assert np.linalg.eigvalsh(sdp.C - sdp.dual_slack(y0))[0] > 0 and sdp.b @ y0 < 0
    result = solve_sdp(sdp, settings=TIGHT)
    assert result.status == "infeasible", result.solver_message
    assert result.solver_code == scs.INFEASIBLE and result.feasible is False


def test_status_table_covers_every_scs_status():
    # The status constants the scs package exports (copied there from scs/include/glbopts.h).
    codes = {getattr(scs, name) for name in ("INFEASIBLE_INACCURATE", "UNBOUNDED_INACCURATE", "SIGINT", "FAILED",
                                              "INDETERMINATE", "INFEASIBLE", "UNBOUNDED", "UNFINISHED", "SOLVED",
                                              "SOLVED_INACCURATE")}
    assert codes == set(STATUS_TABLE)
    assert set(STATUS_TABLE.values()) <= set(STATUSES)


def test_stopping_at_max_iters_is_stopped_on_iterations_with_the_settings_recorded():
    sdp, _ = _family_sdp("sdp-theta", graph="petersen", nodes=10)
    result = solve_sdp(sdp, settings={"max_iters": 5, **TIGHT})
    assert result.status == "stopped_on_iterations" and result.iterations == 5
    assert result.x is None and np.isnan(result.objective)
    assert result.options["eps_abs"] == 1e-7 and result.options["linear_solver"] == "qdldl"
    assert result.solver == "scs" and result.seconds > 0


def test_stopping_at_the_time_limit_is_stopped_on_time_not_a_solution():
    # SCS reports "solved (inaccurate - reached time_limit_secs)" after a time limit (observed with scs 3.3),
    # possibly with 0 iterations; it must not pass for a solution.
    sdp, _ = _family_sdp("sdp-theta", graph="petersen", nodes=10)
    result = solve_sdp(sdp, time_limit=1e-9)
    assert result.status == "stopped_on_time" and result.solver_code == scs.SOLVED_INACCURATE
    assert "time_limit" in result.solver_message and result.x is None
