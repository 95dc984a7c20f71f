"""Binomial bounds, the logistic fit and the law fit against reference libraries."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import special, stats

from calib.analysis.law import fit_law
from calib.analysis.logistic import fit_logistic, separation
from calib.verdicts.stats import clopper_pearson_interval, clopper_pearson_lower, wilson_lower

COUNTS = [(x, n) for n in (1, 5, 10, 30, 97) for x in sorted({0, 1, n // 3, n // 2, n - 1, n})]


@pytest.mark.parametrize("confidence", [0.8, 0.95, 0.99])
def test_clopper_pearson_and_wilson_equal_scipy_binomtest(confidence):
    # Reference: scipy.stats.binomtest(...).proportion_ci, one-sided via alternative='greater'
    # ('exact' is Clopper-Pearson, 'wilson' the Wilson score interval without continuity correction).
    for x, n in COUNTS:
        test = stats.binomtest(x, n, alternative="greater")
        exact = test.proportion_ci(confidence, method="exact").low
        wilson = test.proportion_ci(confidence, method="wilson").low
        assert float(clopper_pearson_lower(x, n, confidence)) == pytest.approx(exact, abs=1e-12), (x, n)
        assert float(wilson_lower(x, n, confidence)) == pytest.approx(wilson, abs=1e-12), (x, n)


def test_two_sided_clopper_pearson_equals_scipy():
    # Reference: scipy.stats.binomtest(x, n).proportion_ci(0.95, method='exact'), two-sided.
    for x, n in COUNTS:
        reference = stats.binomtest(x, n).proportion_ci(0.95, method="exact")
        low, high = clopper_pearson_interval(x, n, 0.95)
        assert (float(low), float(high)) == pytest.approx((reference.low, reference.high), abs=1e-12), (x, n)


def _simulated_counts(rng, k, intercept, slope, trials):
    p = special.expit(intercept + slope * np.log(k))
    return rng.binomial(trials, p)


def test_logistic_fit_equals_statsmodels_logit():
    # Reference: statsmodels.api.Logit on the same trials expanded to one 0/1 row each
    # (maximum likelihood; cov_params is the inverse Fisher information).
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(20261201)
    k = np.array([4, 6, 8, 11, 16, 23, 32, 45, 64])
    trials = np.full(k.size, 30)
    for intercept, slope in [(-6.0, 2.9), (-12.0, 4.5), (-3.0, 1.1)]:
        successes = _simulated_counts(rng, k, intercept, slope, trials)
        ours = fit_logistic(k, successes, trials)
        y = np.concatenate([np.r_[np.ones(s), np.zeros(t - s)] for s, t in zip(successes, trials)])
        x = np.repeat(np.log(k), trials)
        reference = sm.Logit(y, sm.add_constant(x)).fit(disp=0, tol=1e-12, maxiter=200)
        assert ours.ok
        assert [ours.intercept, ours.slope] == pytest.approx(reference.params, rel=1e-7)
        assert ours.covariance == pytest.approx(reference.cov_params(), rel=1e-6)


def test_separation_is_detected_where_statsmodels_finds_no_finite_estimate():
    # Reference: statsmodels reports perfect separation (PerfectSeparationWarning in 0.14+)
    # on complete separation; Albert & Anderson (1984) prove no finite MLE exists there.
    sm = pytest.importorskip("statsmodels.api")
    k = np.array([4, 8, 16, 32])
    successes, trials = np.array([0, 0, 10, 10]), np.full(4, 10)
    reason, bracket = separation(k, successes, trials)
    assert reason.startswith("complete separation") and bracket == (8.0, 16.0)
    assert not fit_logistic(k, successes, trials).ok
    y = np.repeat([0, 0, 1, 1], 10)
    x = np.repeat(np.log(k), 10)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            sm.Logit(y, sm.add_constant(x)).fit(disp=0)
        except Exception as error:  # older statsmodels raise PerfectSeparationError
            assert "separation" in str(error).lower()
        else:
            assert any("separation" in str(w.message).lower() for w in caught)


@pytest.mark.parametrize("successes, expected", [
    ([0, 0, 0, 0], "no success at any swept k"),
    ([10, 10, 10, 10], "every trial succeeds"),
    ([0, 3, 10, 10], "quasi-complete separation"),
])
def test_degenerate_outcomes_give_no_fit_and_a_reason(successes, expected):
    # Albert & Anderson (1984): all-0, all-1 and (quasi-)separated data have no finite MLE.
    fit = fit_logistic([4, 8, 16, 32], successes, [10] * 4)
    assert not fit.ok and fit.reason.startswith(expected)


def test_k50_interval_covers_the_true_k50_at_its_confidence():
    # The delta-method interval is asymptotically exact (common practice). 400 simulated
    # campaigns from a known curve; if the coverage were exactly 0.95 the count of covers is
    # Binomial(400, 0.95): mean 380, sd 4.36, so 3 sd gives [367, 393].
    rng = np.random.default_rng(918273645)
    k = np.array([4, 6, 8, 11, 16, 23, 32])
    trials = np.full(k.size, 30)
    intercept, slope = -6.0, 2.5
    true_k50 = np.exp(-intercept / slope)
    covered = 0
    for _ in range(400):
        fit = fit_logistic(k, _simulated_counts(rng, k, intercept, slope, trials), trials)
        _, low, high = fit.k_at(0.5, 0.95)
        covered += low <= true_k50 <= high
    assert 367 <= covered <= 393


def test_law_fit_equals_scipy_linregress():
    # Reference: scipy.stats.linregress of k on ln n (slope, intercept, stderr of the slope).
    n = np.array([61, 121, 241, 481, 961])
    k = np.array([14.0, 17.5, 19.0, 23.5, 25.0])
    law = fit_law(n, k)
    reference = stats.linregress(np.log(n), k)
    assert (law.a, law.C, law.C_se) == pytest.approx((reference.intercept, reference.slope, reference.stderr), rel=1e-10)
    assert np.sum(np.square(law.residuals)) == pytest.approx(
        np.sum((k - reference.intercept - reference.slope * np.log(n)) ** 2), rel=1e-10)
    assert law.extrapolates(2000) and law.extrapolates(50) and not law.extrapolates(300)
