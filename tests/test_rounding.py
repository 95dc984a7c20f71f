"""Random-hyperplane rounding of max-cut SDP matrices (calib.reduce.rounding).

Sources: M. X. Goemans and D. P. Williamson, J. ACM 42(6):1115–1145, 1995 ("GW 1995": the
rounding, P(i, j separated) = arccos(v_i . v_j)/pi, E[cut] >= 0.87856 * SDP, the SDP bound
(25 + 5 sqrt 5)/8 of the 5-cycle); N. J. Higham, Linear Algebra Appl. 103:103–118, 1988 (the PSD
part X_+ of a symmetric X: X = X_+ - X_-, both PSD, X_+ X_- = 0); W. Hoeffding, "Probability
inequalities for sums of bounded random variables", JASA 58(301):13–30, 1963 (P(|mean - E| >= t)
<= 2 exp(-2 N t^2 / range^2) for N independent draws in an interval of that length).
scipy.sparse.csgraph.laplacian is the reference Laplacian.

Each statistical check uses a fixed seed and a tolerance t = range * sqrt(ln(2 / DELTA) / (2 N)),
so a correct implementation fails it with probability at most DELTA.
"""

from itertools import product

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import laplacian

from calib.errors import InputError
from calib.families import get
from calib.reduce import rounding
from calib.reduce.rounding import (cut_ratio, cut_value, expected_cut, gram_vectors, hyperplane_cuts, maxcut_weights,
                                   rounded_cut, unit_diagonal)
from calib.solvers.scs_sdp import primal_matrix, solve_sdp

TIGHT = {"eps_abs": 1e-7, "eps_rel": 1e-7}
#: GW 1995: alpha = min over 0 < theta <= pi of (2/pi) theta / (1 - cos theta) > 0.87856.
GW_ALPHA = 0.87856
#: Failure probability allowed to each Hoeffding check.
DELTA = 1e-9
C5_SDP = (25.0 + 5.0 * np.sqrt(5.0)) / 8.0


def _hoeffding(value_range: float, draws: int) -> float:
    """Two-sided Hoeffding (1963) half-width at failure probability DELTA for the mean of ``draws`` values."""
    return value_range * np.sqrt(np.log(2.0 / DELTA) / (2.0 * draws))


def _maxcut(seed=0, **params):
    """(W, SCS optimum X, SDP value, edges) of an sdp-maxcut instance, solved with the project's SCS path."""
    family = get("sdp-maxcut")
    instance = family.make(family.resolve(params, "test"), 0, np.random.default_rng(seed))
    result = solve_sdp(instance.problem.validate(), settings=TIGHT)
    assert result.status == "optimal", result.solver_message
    return maxcut_weights(instance.problem), primal_matrix(result), -result.objective, instance.info["edges"]


def _sdp_objective(W, X):
    """1/4 <L, X> with L from scipy.sparse.csgraph.laplacian."""
    return float(np.sum(laplacian(W) * X) / 4.0)


def _c5_gram_matrix():
    """X_ij = cos(4 pi (i - j) / 5): unit vectors at angles 4 pi j / 5 (from memory; checked below)."""
    j = np.arange(5)
    return np.cos(4.0 * np.pi * (j[:, None] - j[None, :]) / 5.0)


def _family_sdp_c5():
    family = get("sdp-maxcut")
    return family.make(family.resolve({"graph": "cycle", "nodes": 5}, "test"), 0, np.random.default_rng(0)).problem


def test_weights_of_the_maxcut_family_are_its_graph():
    # The family's own edge list (info["edges"]) is the graph: unit weights on those pairs, zero elsewhere.
    W, _, _, edges = _maxcut(graph="random", nodes=9, edge_prob=0.4)
    expected = np.zeros((9, 9))
    expected[edges[:, 0], edges[:, 1]] = expected[edges[:, 1], edges[:, 0]] = 1.0
    np.testing.assert_array_equal(W, expected)


def test_c5_known_gram_vectors_are_the_sdp_optimum():
    # GW 1995: the SDP bound of C5 is (25 + 5 sqrt 5)/8; the angles 4 pi j/5 are from memory, so they are
    # checked against the value and against SCS's optimum (the optimum is the same matrix).
    W, X, value, _ = _maxcut(graph="cycle", nodes=5)
    known = _c5_gram_matrix()
    assert value == pytest.approx(C5_SDP, rel=1e-5)
    assert _sdp_objective(W, known) == pytest.approx(C5_SDP, rel=1e-12)
    np.testing.assert_allclose(X, known, atol=1e-6)


def test_every_hyperplane_cuts_4_edges_of_c5_from_the_known_vectors():
    # GW 1995: each edge is cut with probability arccos(cos(4 pi/5))/pi = 0.8, so E[cut] = 4; no cut of the
    # odd cycle C5 exceeds 4 (elementary), so every draw cuts exactly 4.
    W = maxcut_weights(_family_sdp_c5())
    cuts = hyperplane_cuts(W, _c5_gram_matrix(), 500, np.random.default_rng(11))
    np.testing.assert_array_equal(cuts, np.full(500, 4.0))


def test_rounding_of_the_scs_optimum_of_c5():
    # Max-cut of C5 is 4 (common practice: an odd cycle loses at least one edge, a 2/3 split loses one);
    # GW 1995: E[cut] >= 0.87856 * 1/4 <L, X> for the unit-diagonal X rounded, here the SDP optimum.
    W, X, value, _ = _maxcut(graph="cycle", nodes=5)
    assert _sdp_objective(W, unit_diagonal(X)) == pytest.approx(value, rel=1e-6)
    best = rounded_cut(W, X, 10, np.random.default_rng(5)).best
    assert best == 4.0
    draws = 20_000
    mean = rounded_cut(W, X, draws, np.random.default_rng(6)).mean
    assert mean >= GW_ALPHA * _sdp_objective(W, unit_diagonal(X)) - _hoeffding(5.0, draws)


def test_mean_cut_matches_the_separation_probabilities():
    # GW 1995 (Lemma 3.2): edge ij is cut with probability arccos(X_ij)/pi, so the mean of N draws is within
    # the Hoeffding half-width (cut values in [0, |E|]) of sum over edges of arccos(X_ij)/pi.
    W, X, _, edges = _maxcut(seed=2, graph="random", nodes=10, edge_prob=0.5)
    unit = unit_diagonal(X)
    exact = float(np.sum(np.arccos(np.clip(unit[edges[:, 0], edges[:, 1]], -1.0, 1.0))) / np.pi)
    assert expected_cut(W, X) == pytest.approx(exact, rel=1e-12)
    draws = 100_000
    cuts = hyperplane_cuts(sp.csr_array(W), X, draws, np.random.default_rng(3))
    assert abs(cuts.mean() - exact) <= _hoeffding(float(len(edges)), draws)
    assert exact >= GW_ALPHA * _sdp_objective(W, unit)


def _random_weights(nodes, rng):
    W = np.triu(rng.uniform(0.5, 2.0, (nodes, nodes)) * (rng.random((nodes, nodes)) < 0.6), k=1)
    return W + W.T


def test_cut_value_against_brute_force_and_the_laplacian():
    # Brute force over all 2^n sides of the definition sum_{i<j} w_ij [s_i != s_j] (common practice), and
    # 1/4 s^T L s with L from scipy.sparse.csgraph.laplacian.
    rng = np.random.default_rng(7)
    nodes = 7
    W = _random_weights(nodes, rng)
    L = laplacian(W)
    pairs = [(i, j) for i in range(nodes) for j in range(i + 1, nodes) if W[i, j] != 0.0]
    for sides in product([-1, 1], repeat=nodes):
        s = np.array(sides)
        brute = sum(W[i, j] for i, j in pairs if s[i] != s[j])
        assert cut_value(W, s) == pytest.approx(brute, rel=1e-12, abs=1e-12)
        assert cut_value(sp.csr_array(W), s) == pytest.approx(brute, rel=1e-12, abs=1e-12)
        assert cut_value(W, s) == pytest.approx(s @ L @ s / 4.0, rel=1e-12, abs=1e-12)


def test_cut_value_ignores_self_loops():
    # A self-loop joins a node to itself and is never cut (common practice); L = D - W has no self-loop term.
    W = np.array([[3.0, 1.0], [1.0, 5.0]])
    assert cut_value(W, np.array([1, -1])) == 1.0
    assert cut_value(W, np.array([1, 1])) == 0.0


def test_unit_diagonal_is_psd_with_unit_diagonal():
    # Higham 1988: the PSD part keeps the nonnegative eigenpairs; D^{-1/2} X D^{-1/2} of a PSD X is PSD.
    rng = np.random.default_rng(8)
    G = rng.standard_normal((6, 6))
    X = unit_diagonal(G + G.T)
    np.testing.assert_allclose(np.diag(X), np.ones(6), atol=0)
    assert np.linalg.eigvalsh(X)[0] >= -1e-12
    np.testing.assert_array_equal(X, X.T)


def test_unit_diagonal_of_a_psd_matrix_is_its_correlation_matrix():
    # A PSD matrix with a positive diagonal is only rescaled: D^{-1/2} X D^{-1/2} (common practice).
    rng = np.random.default_rng(9)
    V = rng.standard_normal((5, 3))
    X = V @ V.T
    scale = 1.0 / np.sqrt(np.diag(X))
    np.testing.assert_allclose(unit_diagonal(X), X * np.outer(scale, scale), atol=1e-12)


def test_zero_rows_get_a_unit_vector_of_their_own():
    # The documented rule: a node with a zero (clipped) diagonal gets row and column e_i.
    X = np.array([[2.0, 0.0, 2.0], [0.0, -1.0, 0.0], [2.0, 0.0, 2.0]])
    np.testing.assert_allclose(unit_diagonal(X), [[1.0, 0.0, 1.0], [0.0, 1.0, 0.0], [1.0, 0.0, 1.0]], atol=1e-12)
    np.testing.assert_array_equal(unit_diagonal(np.zeros((3, 3))), np.eye(3))


def test_gram_vectors_reproduce_a_psd_matrix():
    rng = np.random.default_rng(10)
    V0 = rng.standard_normal((7, 3))
    X = V0 @ V0.T
    V = gram_vectors(X)
    assert V.shape == (7, 3)
    np.testing.assert_allclose(V @ V.T, X, atol=1e-12 * np.abs(X).max())


def test_gram_vectors_of_an_indefinite_matrix_give_its_psd_part():
    # Higham 1988: X = X_+ - X_- with X_+, X_- PSD and X_+ X_- = 0; V V^T must be that X_+.
    rng = np.random.default_rng(12)
    G = rng.standard_normal((6, 6))
    X = G + G.T
    V = gram_vectors(X)
    plus, minus = V @ V.T, V @ V.T - X
    assert np.linalg.eigvalsh(minus)[0] >= -1e-12
    np.testing.assert_allclose(plus @ minus, np.zeros((6, 6)), atol=1e-10)
    assert V.shape[1] == int(np.sum(np.linalg.eigvalsh(X) > 0))


def test_cut_ratio_of_a_matrix_with_itself_is_one():
    W, X, _, _ = _maxcut(seed=4, graph="random", nodes=10, edge_prob=0.5)
    assert cut_ratio(W, X, X.copy(), 300, seed=13) == 1.0


def test_cut_ratio_rounds_both_matrices_with_the_same_directions():
    # The definition: the mean over the same draws, so it equals the ratio of two hyperplane_cuts runs from
    # the same seed.
    W, X, _, _ = _maxcut(seed=4, graph="random", nodes=10, edge_prob=0.5)
    rng = np.random.default_rng(14)
    G = rng.standard_normal((10, 10))
    other = X + 0.05 * (G + G.T)
    retrieved = hyperplane_cuts(W, other, 400, np.random.default_rng(15)).mean()
    original = hyperplane_cuts(W, X, 400, np.random.default_rng(15)).mean()
    assert cut_ratio(W, other, X, 400, seed=15) == pytest.approx(retrieved / original, rel=1e-15)


def test_cut_ratio_is_undefined_when_the_original_never_cuts():
    # X = all ones puts every node on one side (GW 1995: arccos(1) = 0), so the mean cut of the original is 0.
    W = np.ones((4, 4)) - np.eye(4)
    assert cut_ratio(W, np.eye(4), np.ones((4, 4)), 50, seed=0) is None


def test_blocks_of_directions_do_not_change_the_draws(monkeypatch):
    W, X, _, _ = _maxcut(seed=4, graph="random", nodes=10, edge_prob=0.5)
    whole = hyperplane_cuts(W, X, 50, np.random.default_rng(16))
    monkeypatch.setattr(rounding, "BLOCK_ENTRIES", 30)   # blocks of 3 draws of 10 nodes
    np.testing.assert_array_equal(hyperplane_cuts(W, X, 50, np.random.default_rng(16)), whole)


@pytest.mark.parametrize("call, where", [
    (lambda: cut_value(np.ones((2, 3)), np.array([1, 1])), "W"),
    (lambda: cut_value(np.array([[0.0, 1.0], [2.0, 0.0]]), np.array([1, 1])), "W"),
    (lambda: cut_value(np.eye(2), np.array([1, 0])), "signs"),
    (lambda: hyperplane_cuts(np.eye(2), np.eye(3), 5, np.random.default_rng(0)), "X"),
    (lambda: hyperplane_cuts(np.eye(2), np.eye(2), 0, np.random.default_rng(0)), "draws"),
    (lambda: cut_ratio(np.eye(2), np.eye(2), np.full((2, 2), np.nan), 5, seed=0), "X_original"),
])
def test_bad_input_names_the_argument(call, where):
    with pytest.raises(InputError) as error:
        call()
    assert error.value.where == where
