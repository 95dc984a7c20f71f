"""LP reduction and the four retrievals (calib.reduce.lp, calib.reduce.affine)."""

from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from calib import projectors
from calib.problems.mps import read_mps
from calib.reduce.affine import AffineSet, alternate
from calib.reduce.base import Context
from calib.reduce.lp import RETRIEVALS, LPHandler
from calib.solvers.highs import solve_lp
from reduce_helpers import SOLVER, OrthogonalProjector, PrefixProjector, instance

NETLIB = Path(__file__).resolve().parents[1] / "calib" / "data" / "netlib"
ALL = list(RETRIEVALS)


def _records(lp, original, k, seed, retrievals=ALL, projector=None):
    T = projector or projectors.make("gaussian", k, lp.n_rows, seed)
    return LPHandler.trial_records(lp, original, T, retrievals, SOLVER)


def test_relaxation_and_gap_shrinking_in_k():
    # Vu, Poirion & Liberti (2018): every x with Ax = b has TAx = Tb, so the projected optimum never
    # exceeds the original one. Statistic for "monotone on average": proj_gap over 15 independent
    # draws per k; a one-sided Mann-Whitney U test (scipy.stats.mannwhitneyu) at level 0.01 must find
    # the gaps at each k stochastically larger than at the next k of the grid.
    lp = instance("lp-planted", {"rows": 40, "cols": 80, "cost": "nonnegative"}).problem
    original = LPHandler.solve_original(lp, SOLVER)
    gaps = {}
    for k in (10, 20, 30):
        rows = [_records(lp, original, k, [k, r], ["basis-lstsq"])[0] for r in range(15)]
        assert all(row["proj_status"] == "optimal" for row in rows)  # c > 0 keeps every projection bounded
        assert all(row["proj_objective"] <= original.objective + 1e-7 * max(1.0, abs(original.objective)) for row in rows)
        gaps[k] = [row["proj_gap"] for row in rows]
    for small, large in ((10, 20), (20, 30)):
        assert stats.mannwhitneyu(gaps[small], gaps[large], alternative="greater").pvalue < 0.01


@pytest.mark.parametrize("seed", [0, 1])
def test_square_orthogonal_projection_reproduces_optimum_and_solution(seed):
    # With k = m and T orthogonal, TAx = Tb <=> Ax = b: the projected LP is the original LP, so every
    # retrieval must return the original (unique, random costs) optimum (common practice).
    lp = instance("lp-planted", {"rows": 30, "cols": 60}, index=seed).problem
    original = LPHandler.solve_original(lp, SOLVER)
    T = OrthogonalProjector(lp.n_rows, lp.n_rows, np.random.default_rng(seed))
    reduced = LPHandler.reduce(lp, T)
    x_star = original.x
    for name, row in zip(ALL, _records(lp, original, lp.n_rows, None, ALL, T)):
        assert row["proj_gap"] == pytest.approx(0.0, abs=1e-8), name
        assert row["obj_error"] <= 1e-8 and row["feas_error"] <= 1e-9 and row["sign_violation"] <= 1e-9, name
    for name, retrieve in RETRIEVALS.items():
        got = retrieve(Context(lp, original, reduced, solve_lp(reduced), SOLVER))
        np.testing.assert_allclose(got.x, x_star, atol=1e-7, err_msg=name)
    warm = _records(lp, original, lp.n_rows, None, ["warm-start"], T)[0]
    assert warm["retrieval_iterations"] == 0 and warm["iterations_saved"] == original.iterations


@pytest.mark.parametrize("name", ["afiro", "sc50a", "adlittle"])
def test_square_orthogonal_projection_on_netlib_reproduces_the_optimum(name):
    # Netlib optima may be attained at several points, so the value is compared (published optima
    # in calib/data/netlib/optima.csv are checked against HiGHS elsewhere).
    lp = read_mps(NETLIB / "feasible" / f"{name}.mps").to_standard().lp
    original = LPHandler.solve_original(lp, SOLVER)
    T = OrthogonalProjector(lp.n_rows, lp.n_rows, np.random.default_rng(3))
    for retrieval, row in zip(ALL, _records(lp, original, lp.n_rows, None, ALL, T)):
        assert row["obj_error"] <= 1e-7, retrieval
        assert row["feas_error"] <= 1e-8 and row["sign_violation"] <= 1e-8, retrieval


def test_restricted_repair_is_feasible_and_warm_start_is_optimal():
    # By construction (common practice): a restricted LP's optimum is feasible for the original, and
    # a warm-started simplex ends at the original optimum whatever basis it starts from.
    lp = instance("lp-planted", {"rows": 40, "cols": 80, "cost": "nonnegative"}).problem
    original = LPHandler.solve_original(lp, SOLVER)
    for k in (8, 16, 32):
        repair, warm = _records(lp, original, k, [k, 9], ["restricted-repair", "warm-start"])
        assert repair["feas_error"] <= 1e-9 and repair["sign_violation"] == 0.0
        assert repair["obj_ratio"] >= 1.0 - 1e-9  # feasible, so no better than the optimum (c > 0, orig > 0)
        assert repair["widening_rounds"] >= 0 and repair["retrieval_iterations"] > 0
        assert warm["obj_error"] <= 1e-8
        assert warm["iterations_saved"] == original.iterations - warm["retrieval_iterations"]


def test_affine_projection_matches_the_pseudoinverse():
    # Reference: numpy.linalg.pinv; the projection onto {Ax = b} is x - A^+(Ax - b).
    rng = np.random.default_rng(4)
    A = rng.standard_normal((5, 9))
    A[4] = A[0] + A[1]  # rank deficient, consistent right-hand side
    b = A @ rng.standard_normal(9)
    x = rng.standard_normal(9)
    expected = x - np.linalg.pinv(A) @ (A @ x - b)
    np.testing.assert_allclose(AffineSet(A, b).project(x), expected, atol=1e-12)


def test_alternating_projections_reach_the_intersection():
    # Bregman (1965): alternating projections between {Ax = b} and x >= 0 converge to a common point
    # when one exists; the returned point keeps Ax = b and ends within the stated tolerance.
    rng = np.random.default_rng(5)
    A = rng.standard_normal((6, 20))
    b = A @ rng.uniform(0.5, 1.5, 20)
    out = alternate(rng.standard_normal(20), AffineSet(A, b), lambda v: np.maximum(v, 0.0),
                    lambda v: float(np.linalg.norm(np.minimum(v, 0.0)) / max(1.0, np.linalg.norm(v))))
    assert out.stop == "converged" and 0 < out.rounds <= 500
    assert np.linalg.norm(A @ out.x - b) <= 1e-10 * np.linalg.norm(b)
    assert np.linalg.norm(np.minimum(out.x, 0.0)) <= 1e-9 * max(1.0, np.linalg.norm(out.x))


INFEASIBLE = sorted(path.stem for path in (NETLIB / "infeasible").glob("*.mps"))


def test_infeasible_netlib_classification_per_k():
    # A row projection is a relaxation: a projected "infeasible" is always right, a projected
    # "optimal" of an infeasible LP is the one-sided error. With nested projections (the first k rows
    # of one Gaussian draw) the k-row constraints are a subset of the (k+1)-row ones, so once a
    # projection is infeasible every larger k is too; and at k = m (T invertible, almost surely) the
    # feasible set is the original's, so "optimal" cannot be reported (common practice).
    fractions = (0.1, 0.25, 0.5, 0.75, 1.0)
    counts = np.zeros(len(fractions), dtype=int)
    for name in INFEASIBLE:
        lp = read_mps(NETLIB / "infeasible" / f"{name}.mps").to_standard().lp
        original = LPHandler.solve_original(lp, SOLVER)
        assert original.status == "infeasible"
        m = lp.n_rows
        for replicate in range(3):
            verdicts = []
            for index, fraction in enumerate(fractions):
                k = max(1, int(np.ceil(fraction * m)))
                T = PrefixProjector(k, m, np.random.default_rng([replicate, m]))
                row = _records(lp, original, k, None, ["basis-lstsq"], T)[0]
                verdicts.append(row["proj_status"])
                counts[index] += row["proj_status"] == "infeasible"
                assert row["feasibility_agrees"] == (row["proj_status"] == "infeasible") or row["proj_feasible"] is None
            first = verdicts.index("infeasible") if "infeasible" in verdicts else len(verdicts)
            assert all(status != "optimal" for status in verdicts[first:]), (name, verdicts)
            assert verdicts[-1] != "optimal", name
    assert list(counts) == sorted(counts)  # per-draw monotone, hence the counts too
    print("infeasible netlib, projected 'infeasible' per k fraction", dict(zip(fractions, counts.tolist())))


def test_feasible_netlib_projections_are_never_infeasible():
    # The other side of the one-sided error: a relaxation of a feasible LP is feasible.
    for name in ("afiro", "sc50b", "kb2"):
        lp = read_mps(NETLIB / "feasible" / f"{name}.mps").to_standard().lp
        original = LPHandler.solve_original(lp, SOLVER)
        for k in (2, lp.n_rows // 4, lp.n_rows // 2):
            row = _records(lp, original, k, [k, 1], ["basis-lstsq"])[0]
            assert row["proj_status"] in ("optimal", "unbounded"), (name, k, row["proj_status"])
            assert row["feasibility_agrees"] is True
