"""The user's decision: decision columns, the exact completion, and the completion retrieval
(calib.problems.lp.DecisionMap, calib.reduce.completion, calib.reduce.lp ``completion``)."""

from pathlib import Path

import highspy
import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linprog

from calib import projectors
from calib.families.lp_quantile import check_loss, quantile_regression_lp
from calib.problems.lp import DecisionMap, GeneralLP, StandardLP, decision_of
from calib.problems.mps import read_mps
from calib.reduce.completion import complete, complete_by_rows, unmet_share
from calib.reduce.lp import LPHandler
from calib.solvers.highs import solve_lp
from reduce_helpers import SOLVER, instance

NETLIB = Path(__file__).resolve().parents[1] / "calib" / "data" / "netlib" / "feasible"


def _quantile_data(n: int, seed: int):
    rng = np.random.default_rng(seed)
    X = np.column_stack([np.ones(n), rng.uniform(0, 10, size=(n, 2))])
    y = X @ np.array([1.0, 0.5, -0.3]) + rng.standard_t(3, size=n)
    return X, y


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.ConvergenceWarning")
def test_completed_quantile_point_against_statsmodels_quantreg():
    # Reference: statsmodels QuantReg (IRLS, near-optimal to ~1e-6). The completion of a projected
    # median-regression solution keeps its coefficients, makes every equality row X beta + u - v = y
    # hold exactly, and its objective is the check loss of those coefficients, no smaller than
    # QuantReg's (the completed point is feasible for the original, whose optimum QuantReg nears).
    from statsmodels.regression.quantile_regression import QuantReg

    X, y = _quantile_data(3000, 7)
    form = quantile_regression_lp(X, y, 0.5)
    lp = form.lp
    reference = np.asarray(QuantReg(y, X).fit(q=0.5, max_iter=5000, p_tol=1e-10).params)
    best = check_loss(X, y, reference, 0.5)
    T = projectors.make("countsketch", 150, lp.n_rows, [3, 20261204])
    projected = solve_lp(LPHandler.reduce(lp, T))
    done = complete(lp, projected.x, lp.decision)
    beta = form.original_point(done.x)[: X.shape[1]]
    np.testing.assert_array_equal(beta, form.original_point(projected.x)[: X.shape[1]])  # decision kept as it is
    assert np.max(np.abs(lp.residual(done.x))) <= 1e-12 * np.max(np.abs(y))
    assert unmet_share(lp, done.x) == 0.0 and done.method == "rows" and np.all(done.x >= 0)
    assert lp.objective(done.x) == pytest.approx(check_loss(X, y, beta, 0.5), rel=1e-12)
    assert lp.objective(done.x) >= best * (1 - 1e-6)
    # the projected optimum's own point is far from usable: its objective is well below the optimum
    assert lp.objective(projected.x) < 0.7 * best


@pytest.mark.filterwarnings("ignore::statsmodels.tools.sm_exceptions.ConvergenceWarning")
def test_completing_the_optimal_coefficients_gives_the_quantreg_optimum():
    # statsmodels QuantReg's coefficients, completed: the check loss is QuantReg's (to its IRLS
    # accuracy, 1e-6 relative), which is the original LP's optimum found by HiGHS.
    from statsmodels.regression.quantile_regression import QuantReg

    X, y = _quantile_data(400, 11)
    form = quantile_regression_lp(X, y, 0.25)
    reference = np.asarray(QuantReg(y, X).fit(q=0.25, max_iter=5000, p_tol=1e-10).params)
    guess = np.zeros(form.lp.n_cols)
    guess[:3], guess[-3:] = np.maximum(reference, 0), np.maximum(-reference, 0)
    done = complete(form.lp, guess, form.lp.decision)
    optimum = solve_lp(form.lp).objective
    assert form.lp.objective(done.x) == pytest.approx(optimum, rel=1e-6)


def test_mps_slack_completion_equals_highs_row_activities():
    # Reference: HiGHS (highspy) row activities of its own optimum of afiro. Fix every model column
    # at HiGHS's values; the completion must set each slack or surplus to the distance between the
    # row activity HiGHS reports and the row's bound.
    path = NETLIB / "afiro.mps"
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.readModel(str(path))
    h.run()
    solution = h.getSolution()
    x_model, activity = np.asarray(solution.col_value), np.asarray(solution.row_value)
    general = read_mps(path)
    form = general.to_standard()  # every model column a decision: the completion is the slacks
    n = general.A.shape[1]
    assert not np.any(~np.isfinite(general.col_lo) & ~np.isfinite(general.col_hi))  # no free column in afiro
    guess = np.zeros(form.lp.n_cols)
    guess[:n] = x_model - form.shift  # afiro's columns are all lower-bounded: x = lo + z
    done = complete(form.lp, guess, form.lp.decision)
    lo, hi = general.row_lo, general.row_hi
    equal = np.isfinite(lo) & (lo == hi)
    expected = np.concatenate([activity[np.isfinite(lo) & ~equal] - lo[np.isfinite(lo) & ~equal],
                               hi[np.isfinite(hi) & ~equal] - activity[np.isfinite(hi) & ~equal],
                               (general.col_hi - general.col_lo)[np.isfinite(general.col_hi)] - guess[:n][np.isfinite(general.col_hi)]])
    np.testing.assert_allclose(done.x[n:], expected, atol=1e-9)
    assert unmet_share(form.lp, done.x) == 0.0


def test_structural_decision_of_an_mps_file_marks_its_singletons():
    # afiro: the standard form's slack and surplus columns occur in one row each, so they are not
    # decision columns; a column of the model in two rows or more is (common practice: a column in
    # one row only is determined by that row once the others are fixed).
    general = read_mps(NETLIB / "afiro.mps")
    decision = general.structural_decision()
    per_column = np.diff(sp.csc_array(general.A).indptr)
    boxed = np.isfinite(general.col_lo) & np.isfinite(general.col_hi)
    np.testing.assert_array_equal(decision, np.flatnonzero((per_column >= 2) | ((per_column == 1) & boxed)))
    lp = general.to_standard(decision=decision).lp
    assert set(lp.decision.columns) == set(np.flatnonzero((per_column >= 2) | boxed))
    assert decision_of(StandardLP(c=lp.c, A=lp.A, b=lp.b)).columns.size >= lp.decision.columns.size


def test_decision_prefix_names_the_decision_columns():
    general = read_mps(NETLIB / "afiro.mps")
    chosen = general.structural_decision("c1")  # the vendored afiro names its columns c0, c1, ...
    assert chosen.tolist() == [j for j, name in enumerate(general.col_names) if name.startswith("c1")]
    assert chosen.size == 1 + sum(name[1:].startswith("1") and len(name) > 2 for name in general.col_names)
    lp = general.to_standard(decision=chosen).lp
    assert lp.decision.names == tuple(general.col_names[j] for j in chosen)


@st.composite
def _singleton_lps(draw):
    """Random LPs [A_D | S] with S holding one nonzero per column in a random row, c_S >= 0 (bounded),
    and a random nonnegative decision x_D; some rows get no completion column or one sign only."""
    seed = draw(st.integers(0, 2**31 - 1))
    rng = np.random.default_rng(seed)
    m, p = draw(st.integers(1, 8)), draw(st.integers(1, 5))
    n_slack = draw(st.integers(0, 12))
    A_D = rng.standard_normal((m, p))
    S = np.zeros((m, n_slack))
    S[rng.integers(0, m, n_slack), np.arange(n_slack)] = rng.choice([-2.0, -1.0, 0.5, 1.0, 3.0], n_slack)
    c = np.concatenate([rng.uniform(-1, 1, p), rng.uniform(0, 2, n_slack)])
    b = rng.standard_normal(m) * 3
    x_D = rng.uniform(0, 2, p)
    return StandardLP(c=c, A=np.hstack([A_D, S]), b=b), x_D


@settings(max_examples=150, deadline=None)
@given(_singleton_lps())
def test_closed_form_completion_is_feasible_and_optimal_whenever_some_completion_is(case):
    # Reference: scipy.optimize.linprog (HiGHS) on the restricted LP min c_C x_C s.t. A_C x_C = r, x_C >= 0.
    lp, x_D = case
    p = x_D.size
    guess = np.concatenate([x_D, np.full(lp.n_cols - p, 7.0)])
    done = complete(lp, guess, DecisionMap.select(lp.n_cols, np.arange(p)))
    residual = lp.b - lp.A[:, :p] @ x_D
    reference = linprog(lp.c[p:], A_eq=lp.A[:, p:], b_eq=residual, bounds=(0, None), method="highs") \
        if lp.n_cols > p else None
    feasible = reference.status == 0 if reference is not None else bool(np.allclose(residual, 0.0))
    assert (unmet_share(lp, done.x) == 0.0) == feasible
    assert np.all(done.x[p:] >= 0) and np.array_equal(done.x[:p], x_D)
    if feasible and reference is not None:
        assert lp.c[p:] @ done.x[p:] == pytest.approx(reference.fun, rel=1e-9, abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 2**31 - 1))
def test_lp_completion_of_shared_columns_matches_scipy(seed):
    # Completion columns in two rows each take the restricted-LP rule; its optimum, or (infeasible)
    # the least 1-norm violation, against scipy.optimize.linprog on the same problems.
    rng = np.random.default_rng(seed)
    m, p, q = 5, 3, 6
    C = np.zeros((m, q))
    for j in range(q):
        C[rng.choice(m, 2, replace=False), j] = rng.choice([-1.0, 1.0], 2)
    lp = StandardLP(c=np.concatenate([rng.uniform(0, 1, p), rng.uniform(0.1, 1, q)]),
                    A=np.hstack([rng.standard_normal((m, p)), C]), b=rng.standard_normal(m))
    x_D = rng.uniform(0, 1, p)
    done = complete(lp, np.concatenate([x_D, np.zeros(q)]), DecisionMap.select(lp.n_cols, np.arange(p)))
    residual = lp.b - lp.A[:, :p] @ x_D
    reference = linprog(lp.c[p:], A_eq=C, b_eq=residual, bounds=(0, None), method="highs")
    assert done.method == "lp"
    if reference.status == 0:
        assert unmet_share(lp, done.x) == 0.0
        assert lp.c[p:] @ done.x[p:] == pytest.approx(reference.fun, rel=1e-7, abs=1e-9)
    else:
        elastic = linprog(np.concatenate([np.zeros(q), np.ones(2 * m)]), A_eq=np.hstack([C, np.eye(m), -np.eye(m)]),
                          b_eq=residual, bounds=(0, None), method="highs")
        assert np.abs(C @ done.x[p:] - residual).sum() == pytest.approx(elastic.fun, rel=1e-7, abs=1e-9)
        assert unmet_share(lp, done.x) > 0


def test_closed_form_picks_the_cheapest_column_per_unit_of_the_row():
    # one row, r = 6: columns with a = 2 (cost 3, 1.5 per unit) and a = 3 (cost 3, 1 per unit): x = (0, 2)
    block = sp.csc_array(np.array([[2.0, 3.0, -1.0]]))
    np.testing.assert_array_equal(complete_by_rows(block, np.array([3.0, 3.0, 0.0]), np.array([6.0])), [0.0, 2.0, 0.0])
    np.testing.assert_array_equal(complete_by_rows(block, np.array([3.0, 3.0, 0.0]), np.array([-6.0])), [0.0, 0.0, 6.0])


def test_completion_retrieval_records_on_quantile_regression():
    # A trial record: the completion retrieval's point is judged in the original; its decision error
    # is the relative distance of its coefficients from the original optimum's (checked with numpy).
    built = instance("lp-quantile", {"rows": 800, "features": 3})
    lp = built.problem
    original = LPHandler.solve_original(lp, SOLVER)
    T = projectors.make("countsketch", 80, lp.n_rows, [1, 20261204])
    completion, lstsq = LPHandler.trial_records(lp, original, T, ["completion", "basis-lstsq"], SOLVER)
    assert completion["completion_shortfall"] == 0.0 and completion["feas_error"] <= 1e-12
    assert completion["sign_violation"] == 0.0 and completion["obj_ratio"] >= 1 - 1e-9
    assert completion["obj_error"] < lstsq["obj_error"]
    projected = solve_lp(LPHandler.reduce(lp, projectors.make("countsketch", 80, lp.n_rows, [1, 20261204])))
    p = 4
    beta, beta_star = projected.x[:p] - projected.x[-p:], original.x[:p] - original.x[-p:]
    assert completion["decision_error"] == pytest.approx(np.linalg.norm(beta - beta_star) / np.linalg.norm(beta_star), rel=1e-9)


def test_a_covering_lp_collapses_and_the_completion_shows_it():
    # The diet LP's rows A x - s = r, x + t = cap: when the projected optimum is x = 0 (the slack
    # columns of T [-I; I] span R^k positively, so T A x - T s + T t = T r is met with x = 0 at zero
    # cost), the completion cannot meet any row with r_i > 0: every such row is unmet and the
    # feasibility error is that of x = 0, ||r|| / ||b||.
    built = instance("lp-covering", {"rows": 120, "cols": 20})
    lp = built.problem
    original = LPHandler.solve_original(lp, SOLVER)
    T = projectors.make("gaussian", lp.n_rows // 2, lp.n_rows, [2, 20261204])
    record = LPHandler.trial_records(lp, original, T, ["completion"], SOLVER)[0]
    assert record["proj_objective"] == pytest.approx(0.0, abs=1e-9)
    requirements = lp.b[:120]
    assert record["completion_shortfall"] == pytest.approx(np.mean(requirements > 0) * 120 / lp.n_rows)
    assert record["feas_error"] == pytest.approx(np.linalg.norm(requirements) / np.linalg.norm(lp.b), rel=1e-9)


def test_families_declare_their_decision():
    # quantile: the coefficients; basis pursuit: the signal u - v; covering: the foods; planted: all columns
    quantile = instance("lp-quantile", {"rows": 30, "features": 2}).problem
    assert quantile.decision.columns.tolist() == [0, 1, 2, quantile.n_cols - 3, quantile.n_cols - 2, quantile.n_cols - 1]
    pursuit = instance("lp-basis-pursuit", {"measurements": 10, "length": 20, "sparsity": 2}).problem
    z = np.arange(40.0)
    np.testing.assert_array_equal(pursuit.decision.of(z), z[:20] - z[20:])
    covering = instance("lp-covering", {"rows": 12, "cols": 5}).problem
    assert covering.decision.columns.tolist() == list(range(5))
    planted = instance("lp-planted", {"rows": 6, "cols": 9}).problem
    assert planted.decision.columns.tolist() == list(range(9))


def test_general_form_decision_maps_back_to_the_model_variables():
    # x = lo + z for a lower-bounded column, x = hi - z for an upper-bounded one, x = z+ - z- free
    general = GeneralLP(c=[1.0, 1.0, 1.0], A=[[1.0, 1.0, 1.0], [1.0, -1.0, 2.0]], row_lo=[1.0, -np.inf],
                        row_hi=[1.0, 4.0], col_lo=[2.0, -np.inf, -np.inf], col_hi=[np.inf, 3.0, np.inf])
    form = general.to_standard()
    z = np.arange(1.0, form.lp.n_cols + 1)
    np.testing.assert_allclose(form.lp.decision.of(z), form.original_point(z))


def test_a_decision_prefix_that_names_no_column_is_refused_with_the_field():
    from calib.errors import InputError
    from calib.families import get

    with pytest.raises(InputError) as error:
        get("netlib").resolve({"name": "afiro", "decision_prefix": "zz"}, "families[0].sizes[0]")
    assert error.value.where == "families[0].sizes[0].decision_prefix" and "zz" in error.value.problem


def test_a_max_cut_record_judges_the_cut_and_a_square_orthogonal_sketch_keeps_it():
    # With k = m and T orthogonal the projected SDP is the original (common practice), so the
    # retrieved matrix rounds to the original's expected cut: cut_ratio 1 and the whole gain kept.
    # Reference values: the expected cut of the original optimum is sum_ij w_ij arccos(X_ij) / pi
    # (Goemans and Williamson 1995), computed here with numpy from the graph's edges.
    from calib.problems.svec import smat
    from calib.reduce.sdp import SDPHandler
    from reduce_helpers import OrthogonalProjector

    built = instance("sdp-maxcut", {"nodes": 12})
    sdp = built.problem
    original = SDPHandler.solve_original(sdp, SOLVER)
    T = OrthogonalProjector(sdp.n_rows, sdp.n_rows, np.random.default_rng(3))
    record = SDPHandler.trial_records(sdp, original, T, ["affine-psd"], SOLVER)[0]
    X = smat(original.x)
    d = np.sqrt(np.clip(np.diag(X), 1e-300, None))
    unit = np.clip(X / np.outer(d, d), -1, 1)
    edges = built.info["edges"]
    expected = float(np.sum(np.arccos(unit[edges[:, 0], edges[:, 1]])) / np.pi)
    assert record["cut_original"] == pytest.approx(expected, rel=1e-6)
    assert record["cut_ratio"] == pytest.approx(1.0, abs=1e-4) and record["cut_gain_kept"] == pytest.approx(1.0, abs=1e-3)


def test_the_table_readers_know_each_kinds_default_retrieval():
    # calib.metrics.DEFAULT_RETRIEVALS lets table readers (the one-screen answer) prefer the default
    # without importing the solvers; it must name what the handlers run
    from calib.metrics import DEFAULT_RETRIEVALS
    from calib.reduce import HANDLERS

    assert {kind: handler.default_retrieval for kind, handler in HANDLERS.items()} == DEFAULT_RETRIEVALS
