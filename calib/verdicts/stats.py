"""Binomial confidence bounds for success rates (vectorised over arrays of counts).

One-sided Clopper–Pearson lower bound at confidence 1 - alpha for x successes in n trials: the
alpha quantile of Beta(x, n - x + 1), 0 when x = 0; when x = n it has the closed form
alpha^(1/n). The upper bound is the 1 - alpha quantile of Beta(x + 1, n - x), 1 when x = n.

Reference: C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated
in the case of the binomial", Biometrika 26(4):404–413, 1934.

One-sided Wilson score lower bound with z = Phi^-1(confidence):
(p + z²/2n - z sqrt(p(1-p)/n + z²/4n²)) / (1 + z²/n).

Reference: E. B. Wilson, "Probable inference, the law of succession, and statistical
inference", Journal of the American Statistical Association 22(158):209–212, 1927.

Sample size: :func:`trials_per_unit_needed` gives the trials r per unit, all successes, that ``U``
Bonferroni-corrected bounds need to reach a target t: alpha / U = t^r, r = ceil(ln(alpha / U) / ln t)
(29 for one unit at 90% and 95%).

Only ``scipy.special`` is imported (the beta quantile is ``betaincinv``, Phi^-1 is ``ndtri``: the
functions ``scipy.stats.beta.ppf`` and ``scipy.stats.norm.ppf`` evaluate), so that reading a table
stays light.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy import special


def _counts(successes, trials) -> tuple[np.ndarray, np.ndarray]:
    return np.asarray(successes, dtype=float), np.asarray(trials, dtype=float)


def _beta_quantile(q: float, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Beta(a, b) quantile; nan where a or b is 0 (the callers replace those ends)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return special.betaincinv(a, b, q)


def clopper_pearson_lower(successes: ArrayLike, trials: ArrayLike, confidence: float = 0.95) -> np.ndarray:
    """One-sided Clopper–Pearson lower confidence bound on a binomial proportion (module text).

    ``successes`` and ``trials`` are counts of any broadcastable shapes (0 <= successes <= trials,
    trials >= 1); the result, a proportion in [0, 1], has their broadcast shape. ``confidence`` in
    (0, 1). Checked against ``scipy.stats.beta.ppf(0.05, 30, 1)`` and the closed form:

    >>> round(float(clopper_pearson_lower(30, 30, 0.95)), 6)  # 0.05 ** (1/30)
    0.904966
    >>> float(clopper_pearson_lower(0, 10))
    0.0
    """
    x, n = _counts(successes, trials)
    return np.where(x <= 0, 0.0, _beta_quantile(1.0 - confidence, x, n - x + 1))


def clopper_pearson_upper(successes: ArrayLike, trials: ArrayLike, confidence: float = 0.95) -> np.ndarray:
    """One-sided Clopper–Pearson upper confidence bound on a binomial proportion (module text).

    Shapes and units as :func:`clopper_pearson_lower`. Checked against ``scipy.stats.beta.ppf(0.95,
    1, 30)`` and the closed form:

    >>> round(float(clopper_pearson_upper(0, 30, 0.95)), 6)  # 1 - 0.05 ** (1/30)
    0.095034
    >>> float(clopper_pearson_upper(10, 10))
    1.0
    """
    x, n = _counts(successes, trials)
    return np.where(x >= n, 1.0, _beta_quantile(confidence, x + 1, n - x))


def clopper_pearson_interval(successes: ArrayLike, trials: ArrayLike,
                             confidence: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Two-sided Clopper–Pearson interval (lower, upper) at the given confidence: each end the
    one-sided bound at 1 - (1 - confidence) / 2. Shapes as :func:`clopper_pearson_lower`.

    Checked against ``scipy.stats.binomtest(5, 10).proportion_ci(0.95, method="exact")``
    (0.187086, 0.812914):

    >>> low, high = clopper_pearson_interval(5, 10, 0.95)
    >>> round(float(low), 4), round(float(high), 4)
    (0.1871, 0.8129)
    """
    one_sided = 1.0 - (1.0 - confidence) / 2.0
    return clopper_pearson_lower(successes, trials, one_sided), clopper_pearson_upper(successes, trials, one_sided)


def wilson_lower(successes: ArrayLike, trials: ArrayLike, confidence: float = 0.95) -> np.ndarray:
    """One-sided Wilson score lower bound (formula in the module text; Wilson 1927).

    Shapes and units as :func:`clopper_pearson_lower`. Checked against statsmodels
    (``proportion_confint(9, 10, alpha=0.10, method="wilson")``, whose two-sided 90% lower end is
    the one-sided 95% bound: 0.652281):

    >>> round(float(wilson_lower(9, 10, 0.95)), 4)
    0.6523
    >>> float(wilson_lower(0, 30))
    0.0
    """
    x, n = _counts(successes, trials)
    z = special.ndtri(confidence)
    p = x / n
    centre = p + z**2 / (2 * n)
    spread = z * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2))
    # x = 0 gives exactly 0 (centre = spread); rounding must not print it as 6e-18
    return np.where(x <= 0, 0.0, (centre - spread) / (1 + z**2 / n))


def trials_per_unit_needed(units: int, target: float, confidence: float) -> int:
    """Trials per unit, all successes, for each of ``units`` Clopper–Pearson bounds at confidence
    1 - (1 - confidence) / units to reach ``target`` (Bonferroni over the units): a unit whose r trials
    all succeed has the bound ((1 - confidence) / units)^(1/r), so r = ceil(ln((1 - confidence) / units) / ln target).

    >>> trials_per_unit_needed(1, 0.9, 0.95), trials_per_unit_needed(3, 0.9, 0.95)
    (29, 39)
    """
    return int(math.ceil(math.log((1.0 - confidence) / units) / math.log(target) - 1e-12))
