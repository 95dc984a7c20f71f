"""Published JL bounds: agreement with scikit-learn, the papers' formulas, both directions, and a
Monte Carlo check of the failure-probability-aware Gaussian bound; the ``calib bounds`` command."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats as st
from sklearn.random_projection import johnson_lindenstrauss_min_dim

from calib import theory
from calib.cli import main
from calib.errors import InputError

N_GRID = np.array([2, 3, 10, 101, 1001, 10**4, 10**6])
EPS_GRID = np.array([0.05, 0.1, 0.2, 0.3, 0.5, 0.7, 0.9, 0.99])
#: Level of the binomial test; fixed before the test was run.
ALPHA = 0.01


def test_dasgupta_gupta_equals_scikit_learn_up_to_its_truncation():
    # scikit-learn's johnson_lindenstrauss_min_dim computes the same 4 ln n / (eps²/2 - eps³/3) but
    # truncates with int(); we round up. So ours is theirs or theirs + 1, and theirs + 1 exactly
    # when the real value is not an integer (none on this grid is).
    n, eps = np.meshgrid(N_GRID, EPS_GRID)
    theirs = johnson_lindenstrauss_min_dim(n.ravel(), eps=eps.ravel())
    ours = theory.dasgupta_gupta(n.ravel(), eps.ravel())
    np.testing.assert_array_equal(ours, theirs + 1)


def test_achlioptas_with_beta_zero_is_dasgupta_gupta():
    # Achlioptas 2003, Theorem 1.1: k0 = (4 + 2 beta) ln n / (eps²/2 - eps³/3); beta = 0 is the
    # Dasgupta–Gupta constant (compared through scikit-learn's implementation of the latter)
    n, eps = np.meshgrid(N_GRID, EPS_GRID)
    np.testing.assert_array_equal(theory.achlioptas(n, eps, beta=0.0),
                                  johnson_lindenstrauss_min_dim(n.ravel(), eps=eps.ravel()).reshape(n.shape) + 1)
    # beta = 1 multiplies the constant by 6/4 (value from the paper's formula)
    assert int(theory.achlioptas(1000, 0.1, beta=1.0)) == int(np.ceil(1.5 * 4 * np.log(1000) / (0.005 - 0.001 / 3)))


def test_frankl_maehara_formula():
    # Frankl & Maehara 1988, as restated in the introduction of Dasgupta & Gupta 2003:
    # k = ceil(9 ln n / (eps² - 2 eps³/3)) + 1 (value from memory of that restatement).
    # Worked by hand: 9 ln 1000 / (0.01 - 0.000667) = 6661.05 -> 6662 + 1.
    assert int(theory.frankl_maehara(1000, 0.1)) == 6663
    # eps² - 2eps³/3 is twice the Dasgupta–Gupta cubic, so k - 1 = ceil(9/8 · x) with x the real
    # Dasgupta–Gupta value, which scikit-learn gives truncated: floor(x) <= x < floor(x) + 1
    n, eps = np.meshgrid(N_GRID, EPS_GRID)
    floor_x = johnson_lindenstrauss_min_dim(n.ravel(), eps=eps.ravel()).reshape(n.shape)
    fm = theory.frankl_maehara(n, eps) - 1
    assert np.all(fm >= np.ceil(1.125 * floor_x)) and np.all(fm <= np.ceil(1.125 * (floor_x + 1)))


def test_common_practice_rule():
    # common practice: k = ln(n) / eps² rounded up
    assert int(theory.ln_over_eps2(np.e**4, 0.5)) == 16


@pytest.mark.parametrize("name", sorted(theory.BOUNDS))
def test_each_bound_round_trips_both_directions(name):
    bound = theory.BOUNDS[name]
    n, eps = np.meshgrid(N_GRID, EPS_GRID)
    k = bound.k(n, eps)
    assert k.shape == n.shape and k.dtype == np.int64 and np.all(k >= 1)
    # the eps guaranteed by the k a bound asks for is at most the eps asked for ...
    back = bound.eps(n, k)
    assert np.all(back <= eps)
    # ... and is the smallest: the bound needs more than k for any smaller eps
    np.testing.assert_array_equal(bound.k(n, back), k)
    assert np.all(bound.k(n, np.nextafter(back, 0.0)) > k)
    # k -> eps -> k never asks for more than k; NaN exactly where even eps -> 1 needs more than k
    n_col, ks = N_GRID[None, :], np.array([1, 5, 50, 500, 5000, 50000])[:, None]
    eps_at_k = bound.eps(n_col, ks)
    feasible = ~np.isnan(eps_at_k)
    assert np.all((bound.k(n_col, np.where(feasible, eps_at_k, 0.5)) <= ks)[feasible])
    assert np.all((bound.k(n_col, np.nextafter(1.0, 0.0)) > ks)[~feasible])


@pytest.mark.parametrize("name", sorted(theory.BOUNDS))
def test_bounds_are_vectorised(name):
    bound = theory.BOUNDS[name]
    n, eps = np.array([10, 1000]), np.array([[0.1], [0.3]])
    table = bound.k(n, eps)
    assert table.shape == (2, 2)
    assert table[1, 0] == bound.k(10, 0.3)
    ks = bound.eps(n, np.array([[300], [3000]]))
    assert ks.shape == (2, 2) and ks[0, 1] == bound.eps(1000, 300)


def test_pair_failure_is_the_chi_square_tail_and_decreases_in_k():
    # scipy.stats.chi2: two tails of k·|Tx|²/|x|² ~ chi2_k at (1 ± eps)k
    assert theory.pair_failure(50, 0.3) == pytest.approx(st.chi2(50).cdf(35) + st.chi2(50).sf(65))
    ks = np.arange(1, 3000)
    for eps in (0.05, 0.2, 0.5, 0.9):  # monotone in k: the assumption of chi2_union's bisection
        assert np.all(np.diff(theory.pair_failure(ks, eps)) <= 0)


def test_chi2_union_holds_by_monte_carlo():
    # With k = chi2_union(n, eps, failure), project n points by a Gaussian T many times: the share of
    # draws where some pair leaves 1 ± eps must not exceed failure (one-sided exact binomial test
    # from scipy.stats at level ALPHA).
    from calib.projectors import make

    n_points, dim, eps, failure, draws = 12, 60, 0.5, 0.2, 300
    k = int(theory.chi2_union(n_points, eps, failure))
    points = np.random.default_rng(0).standard_normal((dim, n_points))
    i, j = np.triu_indices(n_points, 1)
    original = np.sum((points[:, i] - points[:, j]) ** 2, axis=0)
    failures = 0
    for draw in range(draws):
        projected = make("gaussian", k, dim, seed=[99, draw]).apply(points)
        ratio = np.sum((projected[:, i] - projected[:, j]) ** 2, axis=0) / original
        failures += bool(np.any(np.abs(ratio - 1.0) > eps))
    assert st.binomtest(failures, draws, failure, alternative="greater").pvalue > ALPHA
    # and it is the smallest such k by its own definition
    pairs = n_points * (n_points - 1) / 2
    assert pairs * theory.pair_failure(k, eps) <= failure < pairs * theory.pair_failure(k - 1, eps)


def test_rules_keep_their_names_and_defaults():
    assert {"dasgupta-gupta", "ln-over-eps2"} <= set(theory.RULES)
    assert set(theory.RULES) == set(theory.BOUNDS)
    assert theory.k_from_eps("dasgupta-gupta", 1000, 0.1) == johnson_lindenstrauss_min_dim(1000, eps=0.1) + 1
    eps = theory.eps_from_k("achlioptas", 1000, 2000)
    assert theory.k_from_eps("achlioptas", 1000, eps) <= 2000


@pytest.mark.parametrize("call,field", [
    (lambda: theory.k_from_eps("nope", 10, 0.1), "k rule"),
    (lambda: theory.k_from_eps("achlioptas", 1, 0.1), "n"),
    (lambda: theory.k_from_eps("achlioptas", 10, 0.0), "eps"),
    (lambda: theory.k_from_eps("achlioptas", 10, 1.0), "eps"),
    (lambda: theory.eps_from_k("achlioptas", 10, 0), "k"),
    (lambda: theory.check_failure(1.0), "failure"),
])
def test_bad_inputs_raise_input_error(call, field):
    with pytest.raises(InputError) as error:
        call()
    assert error.value.where == field


def test_bounds_command_prints_every_bound(capsys):
    assert main(["bounds", "--n", "1001", "--eps", "0.2", "--k", "300", "--failure", "0.01"]) == 0
    out = capsys.readouterr().out
    for name, bound in theory.BOUNDS.items():
        line = next(row for row in out.splitlines() if row.startswith(name))
        parameters = bound.parameters(1001, 0.01)
        assert str(int(bound.k(1001, 0.2, **parameters))) in line.split()
        assert f"{float(bound.eps(1001, 300, **parameters)):.4g}" in line.split()
    assert "1524" not in out  # the chi-square bound at failure 0.01, not at the 0.05 default


@pytest.mark.parametrize("argv", [
    ["bounds", "--n", "1", "--eps", "0.2"],
    ["bounds", "--n", "10", "--eps", "1.5"],
    ["bounds", "--n", "10"],
    ["bounds", "--n", "10", "--k", "0"],
    ["bounds", "--n", "10", "--eps", "0.2", "--failure", "0"],
])
def test_bounds_command_rejects_bad_input(argv, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("calib: error:") and err.count("\n") == 1
