"""SDP aggregation, QP variable projection and point-set distortion (calib.reduce.sdp/qp/points)."""

import numpy as np
import pytest
from scipy import stats
from scipy.spatial.distance import pdist

from calib import projectors
from calib.problems.svec import smat, svec
from calib.reduce import points as points_module
from calib.reduce.points import PointsHandler, pair_sample
from calib.reduce.qp import QPHandler
from calib.reduce.sdp import SDPHandler, psd_clip, psd_violation
from reduce_helpers import SOLVER, OrthogonalProjector, instance

#: SCS runs at eps_abs = eps_rel = 1e-6 (calib.solvers.scs_base); objective values agree to about
#: that relative accuracy, so 1e-4 leaves two orders of margin (common practice).
SCS_VALUE_TOL = 1e-4


def _sweep(handler, problem, original, k, seeds, retrievals):
    rows = []
    for seed in seeds:
        T = projectors.make("gaussian", k, handler.projected_dim(problem), [k, seed, 11])
        rows.append(dict(zip(retrievals, handler.trial_records(problem, original, T, retrievals, SOLVER))))
    return rows


@pytest.mark.parametrize("family,params", [
    ("sdp-planted", {"order": 8, "constraints": 24}),
    ("sdp-maxcut", {"nodes": 12}),
    ("sdp-theta", {"nodes": 10, "edge_prob": 0.3}),
])
def test_sdp_square_projection_reproduces_the_value(family, params):
    # k = m with T invertible keeps exactly the original constraints (Bluhm & Franca 2019, Sec. 2).
    sdp = instance(family, params).problem
    original = SDPHandler.solve_original(sdp, SOLVER)
    T = OrthogonalProjector(sdp.n_rows, sdp.n_rows, np.random.default_rng(2))
    for row in SDPHandler.trial_records(sdp, original, T, list(SDPHandler.retrievals), SOLVER):
        assert abs(row["proj_gap"]) <= SCS_VALUE_TOL
        assert row["obj_error"] <= SCS_VALUE_TOL
        assert row["feas_error"] <= SCS_VALUE_TOL and row["sign_violation"] <= SCS_VALUE_TOL


def test_sdp_retrieval_errors_shrink_as_k_grows():
    # Statistic: over 12 independent draws per k, the affine retrieval's PSD violation and the
    # affine-psd retrieval's feasibility error; a one-sided Mann-Whitney U test (scipy.stats) at level
    # 0.01 must find them stochastically larger at k = 8 than at k = 14 (m = 1 + edges). The
    # projected bound's gap must shrink the same way and every projected optimum is a lower bound.
    sdp = instance("sdp-theta", {"nodes": 12, "edge_prob": 0.25}).problem
    original = SDPHandler.solve_original(sdp, SOLVER)
    assert sdp.n_rows > 14
    small, large = (_sweep(SDPHandler, sdp, original, k, range(12), ["affine", "affine-psd"]) for k in (8, 14))
    for rows in (small, large):
        assert all(row["affine"]["proj_status"] == "optimal" for row in rows)
        assert all(row["affine"]["proj_gap"] >= -SCS_VALUE_TOL for row in rows)
    for retrieval, field in (("affine", "sign_violation"), ("affine-psd", "feas_error"), ("affine", "proj_gap")):
        a = [row[retrieval][field] for row in small]
        b = [row[retrieval][field] for row in large]
        assert stats.mannwhitneyu(a, b, alternative="greater").pvalue < 0.01, (retrieval, field)
    for row in small:
        assert row["affine"]["feas_error"] <= 1e-10  # the affine correction meets the equalities


def test_sdp_infeasible_classification_per_k():
    # A relaxation: "infeasible" for the projection is always right; at k = m the constraint set is
    # the original one, so every projection is classified infeasible (SCS certificate).
    sdp = instance("sdp-infeasible", {"order": 6, "constraints": 15}).problem
    original = SDPHandler.solve_original(sdp, SOLVER)
    assert original.status == "infeasible"
    counts = {}
    for k in (4, 8, 12, 15):
        rows = _sweep(SDPHandler, sdp, original, k, range(6), ["affine-psd"])
        counts[k] = sum(row["affine-psd"]["proj_status"] == "infeasible" for row in rows)
        for row in rows:
            assert row["affine-psd"]["feasibility_agrees"] == (row["affine-psd"]["proj_status"] == "infeasible")
    assert counts[15] == 6
    print("sdp-infeasible order 6, m = 15: projected 'infeasible' of 6 per k", counts)


def test_psd_clip_is_the_frobenius_projection():
    # Higham (1988): the nearest PSD matrix is X_+ and X - X_+ = X_- is NSD with <X_+, X_-> = 0
    # (Moreau decomposition); the violation of a PSD matrix is 0.
    rng = np.random.default_rng(6)
    G = rng.standard_normal((7, 7))
    X = (G + G.T) / 2
    plus = smat(psd_clip(svec(X)))
    minus = X - plus
    assert np.linalg.eigvalsh(plus).min() >= -1e-12 and np.linalg.eigvalsh(minus).max() <= 1e-12
    assert abs(np.sum(plus * minus)) <= 1e-10
    assert psd_violation(svec(plus)) <= 1e-15
    assert psd_violation(svec(X)) == pytest.approx(np.linalg.norm(minus) / max(1.0, np.linalg.norm(X)), rel=1e-10)


@pytest.mark.parametrize("params,tolerance", [
    ({"vars": 40, "rows": 20}, 1e-8),                   # HiGHS, primal feasibility tolerance 1e-9
    ({"vars": 40, "rows": 20, "radius": 1.0}, 1e-5),   # SCS, eps 1e-6
])
def test_qp_lift_is_feasible_and_ratio_tends_to_one(params, tolerance):
    # x = T^T u of a feasible u is feasible for the original by construction (the reduced constraints
    # are the original ones composed with T^T); the reduced QP is a restriction, so its optimum is
    # an upper bound, and at k = n (T invertible) it is the original optimum. Statistic for "ratio
    # -> 1": obj_error over 16 draws per k, one-sided Mann-Whitney at level 0.01 between k = 20 and 30.
    qp = instance("qp-random", params).problem
    original = QPHandler.solve_original(qp, SOLVER)
    errors = {}
    for k in (20, 30, 40):
        rows = [row["lift"] for row in _sweep(QPHandler, qp, original, k, range(16), ["lift"])]
        solved = [row for row in rows if row["proj_status"] == "optimal"]
        assert len(solved) == len(rows)
        assert all(row["feas_error"] <= tolerance for row in solved)
        assert all(row["proj_gap"] >= -tolerance for row in solved)
        errors[k] = [row["obj_error"] for row in solved]
        if k == qp.n_vars:
            assert all(abs(row["obj_ratio"] - 1.0) <= 10 * tolerance for row in solved)
    assert stats.mannwhitneyu(errors[20], errors[30], alternative="greater").pvalue < 0.01


def test_qp_ball_is_kept_exactly():
    # ball_map = T^T: the reduced ball constraint is the original ball evaluated at x = T^T u.
    qp = instance("qp-random", {"vars": 12, "rows": 4, "radius": 0.5}).problem
    T = projectors.make("gaussian", 5, 12, 3)
    reduced = QPHandler.reduce(qp, T)
    u = np.random.default_rng(1).standard_normal(5)
    x = reduced.lift @ u
    assert reduced.qp.ball_norm(u) == pytest.approx(qp.ball_norm(x), rel=1e-12)
    assert reduced.qp.objective(u) == pytest.approx(qp.objective(x), rel=1e-12)


def test_point_distortion_matches_scipy_pdist():
    # Reference: scipy.spatial.distance.pdist (squared Euclidean) before and after projection.
    points = instance("points-gaussian", {"points": 30, "dim": 50}).problem
    T = projectors.make("gaussian", 20, points.dim, 8)
    (row,) = PointsHandler.trial_records(points, PointsHandler.solve_original(points, SOLVER), T, ["none"], SOLVER)
    before = pdist(points.points, "sqeuclidean")
    after = pdist(T.apply(points.columns).T, "sqeuclidean")
    distortion = np.abs(after / before - 1.0)
    assert row["pairs_checked"] == row["pairs_total"] == 30 * 29 // 2
    # the original distances are cached in float32 (relative rounding <= 2^-24)
    assert row["distortion_max"] == pytest.approx(distortion.max(), rel=1e-6)
    assert row["distortion_q99"] == pytest.approx(np.quantile(distortion, 0.99), rel=1e-6)


def test_point_pair_sample_for_large_sets():
    i, j = pair_sample(1000, pairs=5000)
    assert i.size == 5000 and np.all(i < j) and j.max() < 1000
    assert len(set(zip(i.tolist(), j.tolist()))) == 5000  # no pair twice
    again = pair_sample(1000, pairs=5000)
    assert np.array_equal(i, again[0]) and np.array_equal(j, again[1])  # the same pairs for every trial


def test_pair_rank_decoding_matches_numpy_triu_order():
    # pair_sample decodes ranks in the row-major order of numpy.triu_indices(n, 1); all ranks -> all pairs
    n = 37
    i, j = pair_sample(n, pairs=n * (n - 1) // 2)
    ref_i, ref_j = np.triu_indices(n, k=1)
    assert np.array_equal(i, ref_i) and np.array_equal(j, ref_j)


@pytest.mark.parametrize("n_points,block", [(300, 4_000_000), (300, 1_000), (301, 17)])
def test_every_pair_through_gram_blocks_matches_scipy_pdist(monkeypatch, n_points, block):
    # Reference: scipy.spatial.distance.pdist and numpy.quantile over all pairs; small blocks force
    # many row blocks and the top-share quantile through several partitions.
    monkeypatch.setattr(points_module, "BLOCK_ENTRIES", block)
    rng = np.random.default_rng(n_points)
    cloud = rng.standard_normal((n_points, 40))
    projected = cloud @ rng.standard_normal((40, 12)) / np.sqrt(12)
    before = pdist(cloud, "sqeuclidean")
    distortion = np.abs(pdist(projected, "sqeuclidean") / before - 1.0)
    originals = points_module.all_pair_squared_distances(cloud)
    assert originals == pytest.approx(before, rel=1e-6)  # float32 cache: rounding <= 2^-24
    worst, q99, pairs = points_module.distortion_summary(originals, projected)
    assert pairs == before.size
    assert worst == pytest.approx(distortion.max(), rel=1e-6)
    assert q99 == pytest.approx(np.quantile(distortion, 0.99), rel=1e-6)


def test_sampled_claim_is_the_clopper_pearson_bound_for_zero_events():
    # scipy.stats.binomtest(0, s).proportion_ci(0.95, 'exact') one-sided at 95% = two-sided at 90%
    from scipy import stats

    s = 5000
    reference = stats.binomtest(0, s).proportion_ci(confidence_level=0.90, method="exact").high
    assert points_module.sampled_claim(s, 10 * s, 0.95) == pytest.approx(reference, rel=1e-9)
    assert points_module.sampled_claim(s, s) is None


def test_the_affine_set_is_factored_once_per_instance_and_timed_on_its_own(monkeypatch):
    # The factorisation of {x : A x = b} depends on the instance alone: the retrievals of every trial
    # of one instance share it, and its time is reported as t_factor, not inside t_retrieve.
    from calib.reduce import affine

    built = []
    original_init = affine.AffineSet.__init__

    def counting_init(self, A, b):
        built.append(A.shape)
        original_init(self, A, b)

    monkeypatch.setattr(affine.AffineSet, "__init__", counting_init)
    problem = instance("sdp-planted", {"order": 6, "constraints": 12}).problem
    original = SDPHandler.solve_original(problem, SOLVER)
    rows = _sweep(SDPHandler, problem, original, 8, range(3), ["affine", "affine-psd", "alternating"])
    assert built == [problem.A.shape]  # one factorisation for 3 trials x 3 retrievals
    factors = {row[name]["t_factor"] for row in rows for name in row}
    assert len(factors) == 1 and next(iter(factors)) > 0.0
    for row in rows:
        for rec in row.values():  # time_saved counts the factorisation once, as a single solve pays it
            spent = rec["t_sketch"] + rec["t_solve_proj"] + rec["t_retrieve"] + rec["t_factor"]
            assert rec["time_saved"] == pytest.approx(rec["t_solve_orig"] - spent, rel=1e-12, abs=1e-15)
    other = instance("sdp-planted", {"order": 6, "constraints": 12}, index=1).problem
    assert affine.affine_set(other)[0] is not affine.affine_set(problem)[0] and len(built) == 2
