"""Binomial confidence bounds for success rates.

One-sided Clopper–Pearson lower bound at confidence 1 - alpha for x successes in n trials:
the alpha quantile of Beta(x, n - x + 1) (0 when x = 0). When x = n it has the closed form
alpha^(1/n).

Reference: C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated
in the case of the binomial", Biometrika 26(4):404–413, 1934.
"""

from __future__ import annotations

import numpy as np
from scipy import stats


def clopper_pearson_lower(successes, trials, confidence: float = 0.95):
    """One-sided lower confidence bound on a binomial proportion (vectorised).

    >>> round(float(clopper_pearson_lower(30, 30, 0.95)), 6)  # 0.05 ** (1/30)
    0.904966
    >>> float(clopper_pearson_lower(0, 10))
    0.0
    """
    x = np.asarray(successes, dtype=float)
    n = np.asarray(trials, dtype=float)
    alpha = 1.0 - confidence
    with np.errstate(invalid="ignore", divide="ignore"):
        bound = stats.beta.ppf(alpha, x, n - x + 1)
    return np.where(x <= 0, 0.0, bound)


def wilson_lower(successes, trials, confidence: float = 0.95):
    """One-sided Wilson score lower bound (E. B. Wilson, JASA 22(158):209–212, 1927).

    >>> round(float(wilson_lower(9, 10, 0.95)), 4)
    0.6523
    """
    x = np.asarray(successes, dtype=float)
    n = np.asarray(trials, dtype=float)
    z = stats.norm.ppf(confidence)
    p = x / n
    centre = p + z**2 / (2 * n)
    spread = z * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2))
    return (centre - spread) / (1 + z**2 / n)
