"""Structured and real LP families checked against outside references.

Each check names its source beside it. Tolerances: HiGHS solves to 1e-9 feasibility/optimality
(calib.solvers.highs.DEFAULT_OPTIONS), so exact published optima are checked to 1e-8 relative.
"""

from __future__ import annotations

import shutil

import numpy as np
import pytest
from scipy import optimize, stats

from calib.errors import InputError
from calib.families import REGISTRY, get
from calib.families.lp_quantile import check_loss, quantile_regression, quantile_regression_lp
from calib.families.lp_real import netlib_files, netlib_optima
from calib.families.lp_sparse import signal_from_solution
from calib.families.lp_transport import transportation_lp
from calib.instance_io import problem_bytes
from calib.solvers.highs import solve_lp

#: (family, parameters) small enough for quick checks; every LP family of this module appears.
GENERATED = [
    ("lp-covering", {"rows": 60, "cols": 25}),
    ("lp-covering", {"rows": 40, "cols": 30, "density": 1.0, "redundant": 0.0, "cap": 1.5}),
    ("lp-transport", {"sources": 4, "sinks": 7}),
    ("lp-transport", {"sources": 3, "sinks": 5, "surplus": 0.0}),
    ("lp-quantile", {"rows": 80, "features": 3, "tau": 0.3}),
    ("lp-basis-pursuit", {"measurements": 30, "length": 90, "sparsity": 4}),
    ("lp-basis-pursuit", {"measurements": 30, "length": 90, "sparsity": 4, "signs": "nonnegative"}),
]


def make(name: str, params: dict, seed: int, index: int = 0):
    family = get(name)
    full = family.resolve(params, name)
    return family, full, family.make(full, index, np.random.default_rng(seed))


# --- quantile regression -------------------------------------------------------------------

def _engel():
    from statsmodels.datasets import engel

    data = engel.load_pandas().data
    return np.column_stack([np.ones(len(data)), data["income"].to_numpy()]), data["foodexp"].to_numpy()


def _stackloss():
    from statsmodels.datasets import stackloss

    data = stackloss.load_pandas().data
    X = np.column_stack([np.ones(len(data)), data[["AIRFLOW", "WATERTEMP", "ACIDCONC"]].to_numpy()])
    return X, data["STACKLOSS"].to_numpy()


def test_quantile_engel_median_matches_published_r_quantreg():
    # R quantreg, rq(foodexp ~ income, tau = 0.5, data = engel): intercept 81.48225, slope 0.56018
    # (Koenker, "Quantile Regression", Cambridge 2005, and the quantreg manual); printed to 5
    # decimals, so the half-unit 5e-6 is the tolerance.
    X, y = _engel()
    beta = quantile_regression(X, y, 0.5)
    assert abs(beta[0] - 81.48225) <= 5e-6
    assert abs(beta[1] - 0.56018) <= 5e-6


def test_quantile_stackloss_median_matches_published_r_quantreg():
    # R quantreg, rq(stack.loss ~ stack.x, tau = 0.5) (the rq help page example; Koenker and
    # Bassett 1978 use the same data): -39.68985507, 0.83188406, 0.57391304, -0.06086957
    # (value from memory), printed to 8 decimals: tolerance the half-unit 5e-9.
    X, y = _stackloss()
    beta = quantile_regression(X, y, 0.5)
    np.testing.assert_allclose(beta, [-39.68985507, 0.83188406, 0.57391304, -0.06086957], rtol=0, atol=5e-9)


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.ConvergenceWarning")
@pytest.mark.parametrize("data", ["engel", "stackloss"])
@pytest.mark.parametrize("tau", [0.25, 0.5, 0.75, 0.9])
def test_quantile_matches_statsmodels_quantreg(data, tau):
    # statsmodels QuantReg (reference library). It fits by iteratively reweighted least squares and
    # floors |residuals| at 1e-6, so its point is near-optimal only: our LP vertex must have a
    # check loss no larger (up to HiGHS's 1e-9 tolerance), and at most 1e-6 relative smaller.
    from statsmodels.regression.quantile_regression import QuantReg

    X, y = _engel() if data == "engel" else _stackloss()
    beta = quantile_regression(X, y, tau)
    reference = np.asarray(QuantReg(y, X).fit(q=tau, max_iter=5000, p_tol=1e-10).params)
    ours, theirs = check_loss(X, y, beta, tau), check_loss(X, y, reference, tau)
    assert ours <= theirs * (1 + 1e-9)
    assert theirs - ours <= 1e-6 * theirs
    if data == "engel":  # a unique minimiser (both coefficients vary): points agree to IRLS accuracy
        np.testing.assert_allclose(beta, reference, rtol=1e-5)


def test_quantile_lp_layout_is_design_and_identity_blocks():
    # Koenker and Bassett (1978): X beta + u - v = y; standard form [X, I, -I, -X]
    X, y = _engel()
    A = quantile_regression_lp(X, y, 0.5).lp.A.toarray()
    n, p = X.shape
    np.testing.assert_array_equal(A[:, :p], X)
    np.testing.assert_array_equal(A[:, p:p + n], np.eye(n))
    np.testing.assert_array_equal(A[:, p + n:p + 2 * n], -np.eye(n))
    np.testing.assert_array_equal(A[:, p + 2 * n:], -X)


def test_quantile_csv_family_reproduces_engel(tmp_path):
    # the CSV family on the Engel data gives the same published R quantreg median line as above
    X, y = _engel()
    path = tmp_path / "engel.csv"
    path.write_text("foodexp,income\n" + "".join(f"{float(b)!r},{float(a)!r}\n" for a, b in zip(X[:, 1], y)))
    family, full, instance = make("lp-quantile-csv", {"path": str(path), "response": "foodexp"}, 0)
    result = solve_lp(instance.problem)
    assert family.projected_dim(full) == instance.problem.n_rows == 235
    beta = result.x[:2] - result.x[-2:]
    assert abs(beta[0] - 81.48225) <= 5e-6 and abs(beta[1] - 0.56018) <= 5e-6


def test_quantile_csv_with_nan_names_the_file(tmp_path):
    path = tmp_path / "holes.csv"
    path.write_text("y,x\n1.0,2.0\n,3.0\n2.0,4.0\n")
    with pytest.raises(InputError, match="holes.csv"):
        make("lp-quantile-csv", {"path": str(path)}, 0)


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.ConvergenceWarning")
def test_quantile_synthetic_estimates_the_true_quantile_line():
    # Koenker and Bassett (1978): regression quantiles are asymptotically normal around the true
    # tau-quantile line; with statsmodels' QuantReg standard errors (reference library) as sigma,
    # each coefficient must lie within 4 sigma (two-sided normal level 6e-5 per coefficient).
    from statsmodels.regression.quantile_regression import QuantReg

    _, _, instance = make("lp-quantile", {"rows": 4000, "features": 1, "tau": 0.75}, 11)
    lp = instance.problem
    z = solve_lp(lp).x
    beta = z[:2] - z[-2:]
    sigma = QuantReg(lp.b, lp.A.toarray()[:, :2]).fit(q=0.75).bse
    assert np.all(np.abs(beta - instance.info["quantile_coefficients"]) <= 4 * sigma)


# --- basis pursuit and the Donoho-Tanner transition ------------------------------------------

def _statistical_dimension(rho_s: float, signed: bool) -> float:
    """delta(D)/N of the l1 descent cone at an s-sparse point, s = rho_s N.

    Amelunxen, Lotz, McCoy and Tropp, "Living on the edge", Inf. Inference 3(3), 2014, Prop. 4.5:
    inf_t rho_s (1 + t^2) + (1 - rho_s) E dist, with E[(|g| - t)_+^2] = 2((1+t^2)Q(t) - t phi(t))
    (signed) or E[(g - t)_+^2] = (1+t^2)Q(t) - t phi(t) (nonnegative orthant). Its curve is the
    Donoho-Tanner weak threshold.
    """
    tail = lambda t: (1 + t * t) * stats.norm.sf(t) - t * stats.norm.pdf(t)
    fold = 2.0 if signed else 1.0
    objective = lambda t: rho_s * (1 + t * t) + (1 - rho_s) * fold * tail(t)
    return optimize.minimize_scalar(objective, bounds=(0.0, 20.0), method="bounded", options={"xatol": 1e-12}).fun


def _weak_threshold(delta: float, signed: bool) -> float:
    """rho_W(delta): the largest s/k recovered at k/N = delta."""
    return optimize.brentq(lambda rho: _statistical_dimension(rho * delta, signed) - delta, 1e-9, 1.0 - 1e-9)


def test_weak_threshold_matches_published_nonnegative_value():
    # Donoho and Tanner, "Sparse nonnegative solution of underdetermined linear equations by linear
    # programming", PNAS 102(27), 2005: rho_W+(1/2) ~ 0.558 (value from memory)
    assert abs(_weak_threshold(0.5, signed=False) - 0.558) < 0.002


#: N = 400, k = 200 (delta = 1/2). Signed: rho = s/k = 0.05 (inside) and 0.75 (outside), with the
#: Donoho-Tanner weak threshold rho_W(1/2) ~ 0.386. Nonnegative: rho = 0.1 and 0.9, rho_W+(1/2) ~ 0.558.
BP_POINTS = [("signed", 10, True), ("signed", 150, False), ("nonnegative", 20, True), ("nonnegative", 180, False)]


@pytest.mark.parametrize("signs,sparsity,inside", BP_POINTS)
def test_basis_pursuit_follows_donoho_tanner(signs, sparsity, inside):
    # Donoho and Tanner, "Counting faces of randomly projected polytopes when the projection
    # radically lowers dimension", J. AMS 22(1):1-53, 2009: for Gaussian A, l1 minimisation recovers
    # an s-sparse x0 with overwhelming probability when s/k < rho_W(k/N) and fails when above.
    # Inside points sit below rho_W / 3, outside ones above 1.5 rho_W. For the inside points,
    # Amelunxen et al. (2014, Thm II) bound the per-trial failure probability by
    # eta = 4 exp(-a^2 / 8), a = (k - delta(D)) / sqrt(N): 0.0033 (signed, s = 10) and 0.016
    # (nonnegative, s = 20), asserted below; their bound is too loose to say more outside.
    N, k = 400, 200
    rho, threshold = sparsity / k, _weak_threshold(k / N, signs == "signed")
    assert (rho < threshold / 3) if inside else (rho > 1.5 * threshold)
    if inside:
        a = (k - N * _statistical_dimension(sparsity / N, signs == "signed")) / np.sqrt(N)
        assert 4 * np.exp(-a * a / 8) < 0.02
    for seed in range(4):
        _, _, instance = make("lp-basis-pursuit", {"measurements": k, "length": N, "sparsity": sparsity, "signs": signs}, seed)
        result = solve_lp(instance.problem)
        assert result.ok
        x0 = instance.info["planted_signal"]
        error = np.max(np.abs(signal_from_solution(result.x, signs) - x0))
        if inside:
            assert error <= 1e-6  # exact recovery (nonzeros have magnitude >= 1)
        else:
            # failure certified: a feasible point with smaller l1 norm than x0 exists
            assert result.objective < np.abs(x0).sum() - 1e-6 and error > 1e-2


# --- transportation --------------------------------------------------------------------------

def test_transportation_dantzig_example():
    # G. B. Dantzig, "Linear Programming and Extensions", Princeton University Press, 1963, Sec. 3.3:
    # plants with 350 and 600 cases, markets needing 325, 300, 275 cases, distances in thousands of
    # miles, freight 90 $ per case per thousand miles; cost in thousands of dollars; optimum 153.675.
    miles = np.array([[2.5, 1.7, 1.8], [2.5, 1.8, 1.4]])
    supply, demand = np.array([350.0, 600.0]), np.array([325.0, 300.0, 275.0])
    form = transportation_lp(supply, demand, 90 * miles / 1000)
    result = solve_lp(form.lp)
    assert result.ok
    assert abs(result.objective - 153.675) <= 1e-8 * 153.675
    flows = form.original_point(result.x).reshape(2, 3)
    assert np.all(flows.sum(axis=1) <= supply + 1e-9) and np.all(flows.sum(axis=0) >= demand - 1e-9)


def test_transportation_standard_form_agrees_with_scipy_linprog():
    # scipy.optimize.linprog (reference library) on the inequality form: sum_j x_ij <= a_i,
    # -sum_i x_ij <= -d_j, x >= 0.
    rng = np.random.default_rng(3)
    supply, demand, cost = rng.uniform(50, 100, 4), rng.uniform(10, 60, 6), rng.uniform(1, 9, (4, 6))
    ours = solve_lp(transportation_lp(supply, demand, cost).lp).objective
    A_ub = np.vstack([np.kron(np.eye(4), np.ones((1, 6))), -np.kron(np.ones((1, 4)), np.eye(6))])
    reference = optimize.linprog(cost.ravel(), A_ub=A_ub, b_ub=np.concatenate([supply, -demand]), method="highs-ds")
    assert abs(ours - reference.fun) <= 1e-8 * abs(reference.fun)


# --- Netlib ------------------------------------------------------------------------------------

FEASIBLE = [name for name, (_, ok) in netlib_files().items() if ok]
INFEASIBLE = [name for name, (_, ok) in netlib_files().items() if not ok]


def test_netlib_has_the_vendored_set():
    assert len(FEASIBLE) == 15 and len(INFEASIBLE) == 5
    assert set(FEASIBLE) == set(netlib_optima())


@pytest.mark.parametrize("name", FEASIBLE)
def test_netlib_reproduces_published_optimum(name):
    # Netlib lp/data readme summary table (optima.csv): every optimum to 1e-8 relative
    family, full, instance = make("netlib", {"name": name}, 0)
    result = solve_lp(instance.problem)
    published = netlib_optima()[name]
    assert result.ok
    assert abs(result.objective - published) <= 1e-8 * abs(published)
    assert instance.info["optimal_value"] == published
    assert family.projected_dim(full) == instance.problem.n_rows
    assert family.n_points(full) == instance.problem.n_cols + 1


@pytest.mark.parametrize("name", INFEASIBLE)
def test_netlib_infeasible_reported_infeasible(name):
    # Netlib lp/infeas collection: every problem there is infeasible
    _, _, instance = make("netlib", {"name": name}, 0)
    assert instance.info["feasible"] is False
    assert solve_lp(instance.problem).status == "infeasible"


# --- the user's MPS folder ---------------------------------------------------------------------

def test_mps_dir_reads_a_users_file(tmp_path):
    # the Netlib afiro optimum (Netlib lp/data readme) through the user-folder family
    shutil.copy(netlib_files()["afiro"][0], tmp_path / "plant.mps")
    family, full, instance = make("mps-dir", {"dir": str(tmp_path), "name": "plant"}, 0)
    assert abs(solve_lp(instance.problem).objective - netlib_optima()["afiro"]) <= 1e-8 * 464.75
    assert family.projected_dim(full) == instance.problem.n_rows


@pytest.mark.parametrize("text", [
    "NAME bad\nROWS\n N cost\n E r0\nCOLUMNS\n x0 r9 1.0\nRHS\n rhs r0 1.0\nENDATA\n",  # unknown row
    "this is not an MPS file\n",
])
def test_mps_dir_malformed_file_names_the_file(tmp_path, text):
    (tmp_path / "broken.mps").write_text(text)
    with pytest.raises(InputError, match="broken.mps"):
        make("mps-dir", {"dir": str(tmp_path), "name": "broken.mps"}, 0)


def test_mps_dir_nan_entry_names_the_file(tmp_path):
    (tmp_path / "holes.mps").write_text("NAME n\nROWS\n N cost\n E r0\nCOLUMNS\n x0 cost 1.0\n x0 r0 nan\nRHS\n rhs r0 1.0\nENDATA\n")
    with pytest.raises(InputError, match="holes.mps"):
        make("mps-dir", {"dir": str(tmp_path), "name": "holes"}, 0)


def test_mps_dir_missing_file_lists_the_folder(tmp_path):
    shutil.copy(netlib_files()["afiro"][0], tmp_path / "afiro.mps")
    with pytest.raises(InputError, match="afiro.mps"):
        make("mps-dir", {"dir": str(tmp_path), "name": "nothere"}, 0)


# --- every generator ---------------------------------------------------------------------------

@pytest.mark.parametrize("name,params", GENERATED)
def test_same_seed_gives_identical_bytes(name, params):
    # common practice: a seeded generator is a pure function of (parameters, seed)
    _, _, first = make(name, params, 2024)
    _, _, again = make(name, params, 2024)
    _, _, other = make(name, params, 2025)
    assert problem_bytes("lp", first.problem) == problem_bytes("lp", again.problem)
    assert problem_bytes("lp", first.problem) != problem_bytes("lp", other.problem)
    for key, value in first.info.items():
        np.testing.assert_array_equal(value, again.info[key])


@pytest.mark.parametrize("name,params", GENERATED)
def test_planted_families_are_feasible_and_bounded(name, params):
    # planted point: feasible by construction; HiGHS must agree and find an optimum no worse
    family, full, instance = make(name, params, 7)
    lp, planted = instance.problem, instance.info["planted_x"]
    assert instance.info["feasible"] is True
    assert planted.min() >= 0
    assert np.max(np.abs(lp.residual(planted))) <= 1e-9 * max(1.0, np.abs(lp.b).max())
    result = solve_lp(lp)
    assert result.status == "optimal"
    assert result.objective <= lp.objective(planted) + 1e-7 * max(1.0, abs(lp.objective(planted)))
    assert family.projected_dim(full) == lp.n_rows
    assert family.n_points(full) == lp.n_cols + 1


def test_covering_redundant_rows_are_implied():
    # the redundant rows never bind: dropping them leaves the optimum unchanged (scipy linprog,
    # reference library, on the inequality form recovered from the standard form)
    _, full, instance = make("lp-covering", {"rows": 50, "cols": 20, "redundant": 0.6}, 5)
    lp, redundant = instance.problem, instance.info["redundant_rows"]
    rows, cols = full["rows"], full["cols"]
    A = lp.A.toarray()[:rows, :cols]
    cap = lp.b[rows:]
    keep = np.setdiff1d(np.arange(rows), redundant)
    assert redundant.size == 30
    solve = lambda idx: optimize.linprog(lp.c[:cols], A_ub=-A[idx], b_ub=-lp.b[idx], bounds=list(zip(np.zeros(cols), cap)), method="highs-ds").fun
    full_value, core_value = solve(np.arange(rows)), solve(keep)
    assert abs(full_value - core_value) <= 1e-9 * abs(full_value)
    assert abs(solve_lp(lp).objective - full_value) <= 1e-8 * abs(full_value)


@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_every_family_documents_every_parameter(name):
    # common practice: a listed parameter without a doc line is unusable from `calib families`
    family = REGISTRY[name]
    assert set(family.param_doc) == set(family.defaults)
    assert all(family.param_doc.values()) and family.description


@pytest.mark.parametrize("name,params,bad", [
    ("lp-covering", {"rows": 10, "cols": 5}, {"redundant": 1.0}),
    ("lp-transport", {"sources": 2, "sinks": 2}, {"rate": -1.0}),
    ("lp-quantile", {"rows": 10, "features": 1}, {"tau": 1.0}),
    ("lp-basis-pursuit", {"measurements": 5, "length": 10}, {"sparsity": 11}),
    ("lp-basis-pursuit", {"measurements": 5, "length": 10}, {"signs": "both"}),
    ("netlib", {}, {"name": "nosuch"}),
])
def test_out_of_range_parameters_are_input_errors(name, params, bad):
    with pytest.raises(InputError, match=next(iter(bad))):
        get(name).resolve({**params, **bad}, name)


def test_standard_point_inverts_original_point():
    # common practice: the slack-form lift of a feasible point is feasible and maps back to it
    # (checked on a model with an upper-only column, a boxed column and ranged, <= and >= rows)
    from calib.problems.lp import GeneralLP

    A = np.array([[1.0, 2.0, -1.0], [0.5, -1.0, 3.0], [1.0, 1.0, 1.0]])
    general = GeneralLP(c=[1.0, -1.0, 2.0], A=A, row_lo=[-5.0, -np.inf, 0.0], row_hi=[5.0, 4.0, np.inf],
                        col_lo=[-np.inf, 0.0, 1.0], col_hi=[2.0, np.inf, 3.0])
    x = np.array([1.5, 0.25, 1.1])
    form = general.to_standard()
    z = form.standard_point(x)
    assert z.min() >= 0 and np.allclose(form.lp.residual(z), 0.0, atol=1e-12)
    np.testing.assert_allclose(form.original_point(z), x, atol=1e-12)
    assert form.lp.objective(z) == pytest.approx(float(np.dot(general.c, x)))
