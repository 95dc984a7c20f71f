"""Core LP path: general form -> standard form -> HiGHS, random families, the projected relaxation."""

import csv

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import linprog

from calib import projectors
from calib.errors import InputError
from calib.families import get
from calib.problems.lp import GeneralLP, StandardLP
from calib.problems.mps import read_mps
from calib.reduce.lp import basis_lstsq, project_lp
from calib.solvers.highs import solve_lp
from tests.conftest import NETLIB


def _optima():
    with open(NETLIB / "optima.csv") as handle:
        return {row["name"]: float(row["optimal_value"]) for row in csv.DictReader(handle)}


@pytest.mark.parametrize("name", sorted(_optima()))
def test_netlib_feasible_reproduces_published_optimum(name):
    # Source: Netlib lp/data readme summary table (published optimal values), via optima.csv.
    general = read_mps(NETLIB / "feasible" / f"{name}.mps")
    result = solve_lp(general.to_standard().lp)
    expected = _optima()[name]
    assert result.status == "optimal"
    assert abs(result.objective - expected) <= 1e-8 * abs(expected)


@pytest.mark.parametrize("name", sorted(_optima()))
def test_netlib_simplex_and_interior_point_agree_on_the_published_optimum(name):
    # Source: Netlib lp/data readme (published optimal values, optima.csv). Both methods of the fair
    # baseline, interior point with and without crossover, reach the published value to 1e-7 (relative).
    lp = read_mps(NETLIB / "feasible" / f"{name}.mps").to_standard().lp
    expected = _optima()[name]
    for method, need_basis in (("simplex", True), ("ipm", False), ("ipm", True)):
        result = solve_lp(lp, method=method, need_basis=need_basis)
        assert result.status == "optimal", (method, need_basis)
        assert result.options["solver"] == method
        assert (result.basis is not None) == need_basis or method == "simplex"
        assert abs(result.objective - expected) <= 1e-7 * abs(expected), (method, need_basis)


@pytest.mark.parametrize("name", ["box1", "itest2", "itest6", "klein1", "woodinfe"])
def test_netlib_infeasible_reported_infeasible_by_interior_point(name):
    # Source: Netlib lp/infeas collection: the interior-point method must reach the same verdict.
    result = solve_lp(read_mps(NETLIB / "infeasible" / f"{name}.mps").to_standard().lp, method="ipm", need_basis=False)
    assert result.feasible is False, result.solver_message


@pytest.mark.parametrize("name", ["box1", "itest2", "itest6", "klein1", "woodinfe"])
def test_netlib_infeasible_reported_infeasible(name):
    # Source: Netlib lp/infeas collection: every problem there has no feasible point.
    result = solve_lp(read_mps(NETLIB / "infeasible" / f"{name}.mps").to_standard().lp)
    assert result.status == "infeasible"
    assert result.feasible is False


def test_general_form_conversion_matches_scipy_linprog():
    # Reference library: scipy.optimize.linprog (HiGHS through SciPy's own wrapper) on the same
    # general-form LP with every bound type: free, lower-only, upper-only, boxed columns;
    # <=, >=, ranged and equality rows.
    rng = np.random.default_rng(7)
    m, n = 6, 5
    A = rng.standard_normal((m, n))
    x_feasible = np.array([0.5, -1.0, 2.0, -0.3, 1.5])
    ax = A @ x_feasible
    row_lo = np.array([-np.inf, ax[1] - 1, ax[2] - 1, ax[3], -np.inf, ax[5] - 0.5])
    row_hi = np.array([ax[0] + 1, np.inf, ax[2] + 1, ax[3], np.inf, ax[5] + 0.5])
    col_lo = np.array([0.0, -np.inf, 1.0, -np.inf, -2.0])
    col_hi = np.array([np.inf, np.inf, 3.0, 0.0, 4.0])
    c = np.array([1.0, 0.5, -1.0, -0.7, 0.3])
    lp = GeneralLP(c=c, A=A, row_lo=row_lo, row_hi=row_hi, col_lo=col_lo, col_hi=col_hi, offset=2.5)
    form = lp.to_standard()
    ours = solve_lp(form.lp)

    finite = np.isfinite(row_hi) & (row_lo != row_hi)
    lower = np.isfinite(row_lo) & (row_lo != row_hi)
    eq = row_lo == row_hi
    reference = linprog(c, A_ub=np.vstack([A[finite], -A[lower]]), b_ub=np.concatenate([row_hi[finite], -row_lo[lower]]),
                        A_eq=A[eq], b_eq=row_lo[eq], bounds=list(zip(col_lo, col_hi)), method="highs")
    assert reference.status == 0 and ours.status == "optimal"
    assert ours.objective == pytest.approx(reference.fun + 2.5, rel=1e-9, abs=1e-9)
    x = form.original_point(ours.x)
    assert np.all(A @ x <= row_hi + 1e-7) and np.all(A @ x >= row_lo - 1e-7)
    assert np.all(x >= col_lo - 1e-9) and np.all(x <= col_hi + 1e-9)
    assert c @ x + 2.5 == pytest.approx(ours.objective, rel=1e-9, abs=1e-9)


def test_standard_lp_validation_names_the_problem():
    with pytest.raises(InputError, match="NaN"):
        StandardLP(c=[1.0, np.nan], A=np.eye(2), b=[1.0, 1.0]).validate()
    with pytest.raises(InputError, match="b has shape"):
        StandardLP(c=[1.0, 1.0], A=np.eye(2), b=[1.0]).validate()


def test_broken_mps_is_an_input_error(tmp_path):
    broken = tmp_path / "broken.mps"
    broken.write_text("NAME broken\nROWS\n N obj\n L c1\nCOLUMNS\n    x1 obj 1 c1\n")  # truncated
    with pytest.raises(InputError, match="broken.mps"):
        read_mps(broken)
    with pytest.raises(InputError, match="no such file"):
        read_mps(tmp_path / "missing.mps")


def _instance(name, seed=3, **params):
    family = get(name)
    return family.make(family.resolve(params, "test"), 0, np.random.default_rng(seed))


def test_planted_lp_is_feasible_and_bounded_by_its_dual_certificate():
    # Weak LP duality (common practice): y0 with A^T y0 <= c gives b^T y0 <= optimum.
    instance = _instance("lp-planted", rows=40, cols=90)
    lp, info = instance.problem, instance.info
    result = solve_lp(lp)
    assert result.status == "optimal"
    y0 = info["dual_certificate"]
    assert np.all(lp.A.T @ y0 <= lp.c + 1e-12)
    assert lp.b @ y0 <= result.objective + 1e-9
    assert lp.objective(info["planted_x"]) >= result.objective - 1e-9


def test_farkas_lp_certificate_and_solver_agree():
    # Farkas' lemma (common practice): A^T y >= 0 and b^T y < 0 certify that Ax = b, x >= 0 is empty.
    instance = _instance("lp-farkas", rows=30, cols=70)
    lp, y0 = instance.problem, instance.info["farkas_certificate"]
    assert np.all(lp.A.T @ y0 >= 0.1 - 1e-12) and lp.b @ y0 < 0
    assert solve_lp(lp).status == "infeasible"


def test_generators_are_deterministic_per_seed():
    first = _instance("lp-planted", seed=11, rows=20, cols=40, density=0.3)
    second = _instance("lp-planted", seed=11, rows=20, cols=40, density=0.3)
    assert sp.issparse(first.problem.A)
    assert (first.problem.A != second.problem.A).nnz == 0
    assert np.array_equal(first.problem.b, second.problem.b) and np.array_equal(first.problem.c, second.problem.c)


@pytest.mark.parametrize("k", [5, 15, 30, 45])
def test_projected_lp_is_a_relaxation(k):
    # Every x with Ax = b satisfies TAx = Tb, so the projected minimum never exceeds the original
    # (common practice; Vu, Poirion & Liberti, Math. Oper. Res. 2018, Sec. 2).
    lp = _instance("lp-planted", rows=50, cols=100, cost="nonnegative").problem
    original = solve_lp(lp)
    for replicate in range(5):
        T = projectors.make("gaussian", k, lp.n_rows, seed=[k, replicate])
        projected = solve_lp(project_lp(lp, T))
        assert projected.status == "optimal"
        assert projected.objective <= original.objective + 1e-7 * max(1.0, abs(original.objective))


def test_square_orthogonal_projection_reproduces_the_original():
    # With k = m and an invertible T the projected LP is the original LP (common practice).
    lp = _instance("lp-planted", rows=30, cols=60).problem
    original = solve_lp(lp)
    T = projectors.make("gaussian", lp.n_rows, lp.n_rows, seed=5)
    projected = solve_lp(project_lp(lp, T))
    assert projected.objective == pytest.approx(original.objective, rel=1e-8)
    x = basis_lstsq(lp, projected)
    assert np.linalg.norm(lp.residual(x)) <= 1e-8 * max(1.0, np.linalg.norm(lp.b))
    assert lp.objective(x) == pytest.approx(original.objective, rel=1e-7)


def test_low_rank_rows_are_recovered_once_k_reaches_the_rank():
    # b lies in the r-dimensional range of A, so T is injective on {Ax - b} once k >= r and the
    # projected LP has the original feasible set (common practice: subspace embedding argument).
    lp = _instance("lp-planted", rows=80, cols=160, rank=6, cost="nonnegative").problem
    original = solve_lp(lp)
    T = projectors.make("gaussian", 6, lp.n_rows, seed=1)
    assert solve_lp(project_lp(lp, T)).objective == pytest.approx(original.objective, rel=1e-6)
