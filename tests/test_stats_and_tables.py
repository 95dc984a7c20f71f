"""Confidence bounds and the safe-k rule."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from calib.analysis.stats import clopper_pearson_lower
from calib.analysis.tables import Confidence, _safe_k
from calib.errors import InputError


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


def _cell(passes):
    return pd.DataFrame({"k": [4, 8, 16, 32][: len(passes)], "passes": passes})


def test_safe_k_needs_every_larger_k_to_pass():
    assert _safe_k(_cell([False, True, False, True]))["safe_k"] == 32
    assert _safe_k(_cell([False, True, True, True]))["safe_k"] == 8
    result = _safe_k(_cell([True, True, True, False]))
    assert result["safe_k"] is None and "largest" in result["safe_k_reason"]
    assert "may be smaller" in _safe_k(_cell([True, True]))["safe_k_reason"]


def test_confidence_is_validated():
    with pytest.raises(InputError, match="--delta"):
        Confidence(delta=1.5)
