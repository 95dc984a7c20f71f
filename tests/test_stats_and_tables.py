"""Confidence bounds and the safe-k rule."""

import pytest
from scipy import stats

from calib.errors import InputError
from calib.verdicts.saferule import Confidence, safe_k_rule
from calib.verdicts.stats import clopper_pearson_lower


@pytest.mark.parametrize("successes,trials", [(0, 10), (3, 10), (9, 10), (10, 10), (27, 30), (150, 200)])
def test_clopper_pearson_matches_scipy(successes, trials):
    # Reference: scipy.stats.binomtest(...).proportion_ci(method='exact') is Clopper-Pearson;
    # the one-sided lower bound at 95% is the lower end of the alternative='greater' interval.
    reference = stats.binomtest(successes, trials, alternative="greater").proportion_ci(0.95, method="exact").low
    assert float(clopper_pearson_lower(successes, trials, 0.95)) == pytest.approx(reference, abs=1e-12)


@pytest.mark.parametrize("trials", [1, 5, 29, 30, 100])
def test_all_successes_closed_form(trials):
    # Closed form of the one-sided Clopper-Pearson bound when all n trials succeed: alpha^(1/n).
    assert float(clopper_pearson_lower(trials, trials, 0.95)) == pytest.approx(0.05 ** (1 / trials), rel=1e-12)


def _rule(passes):
    return safe_k_rule([4, 8, 16, 32][: len(passes)], passes)


def test_safe_k_needs_every_larger_k_to_pass():
    assert _rule([False, True, False, True])[0] == 32
    assert _rule([False, True, True, True])[0] == 8
    safe_k, reason = _rule([True, True, True, False])
    assert safe_k is None and "largest" in reason
    assert "may be smaller" in _rule([True, True])[1]


def test_confidence_is_validated():
    with pytest.raises(InputError, match="--delta"):
        Confidence(delta=1.5)
