"""Logistic fit of success on ln k: the phase-transition midpoint k50 and the k at a target rate.

Model: P(success | k) = 1 / (1 + exp(-(b0 + b1 ln k))), fitted by maximum likelihood on the
binomial counts of each swept k (Newton–Raphson, which for the logit link is iteratively
reweighted least squares). The covariance of (b0, b1) is the inverse Fisher information at the
optimum, as in any logistic-regression package.

Derived quantities, with a delta-method interval on the ln k scale at the requested confidence
(two-sided), mapped back by exp:

- k50 = exp(-b0 / b1), the k where the fitted success is one half;
- k at rate p: exp((logit(p) - b0) / b1).

The maximum-likelihood estimate does not exist when the outcomes are separated by k: no success,
no failure, or every failure at a smaller k than every success (complete separation), or the two
touching at a single k (quasi-complete separation). Those cells get no fit and a stated reason,
with the bracket of k where the transition must lie.

Clustered trials (every instance measured at every k): :func:`fit_clustered` keeps the same point
estimate (the pooled fit is the population-averaged curve of the class: an independence working
model in the sense of Liang & Zeger 1986) and replaces the covariance by the cluster-robust
("sandwich") covariance over instances, H^-1 (G/(G-1) sum_g s_g s_g') H^-1, with H the Fisher
information and s_g the score of instance g summed over all its trials at every k (so the interval
accounts for the correlation jointly across k). Its intervals use Student's t with G - 1 degrees of
freedom instead of the normal quantile (common practice for few clusters, Cameron & Miller 2015).
With one trial per instance and per k the k's of one instance are still one cluster.

References: K.-Y. Liang and S. L. Zeger, "Longitudinal data analysis using generalized linear
models", Biometrika 73(1):13–22, 1986; A. C. Cameron and D. L. Miller, "A practitioner's guide to
cluster-robust inference", Journal of Human Resources 50(2):317–372, 2015.

Reference: A. Albert and J. A. Anderson, "On the existence of maximum likelihood estimates in
logistic regression models", Biometrika 71(1):1–10, 1984 (separation).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
from numpy.typing import ArrayLike
from scipy import special, stats

_MAX_ITERATIONS = 100
_STEP_TOLERANCE = 1e-10


@dataclass(frozen=True)
class LogisticFit:
    """A fitted transition, or the reason there is none (``intercept`` is None then).

    ``covariance`` is the 2x2 covariance of (intercept, slope); ``bracket`` is (low, high) in k
    where the transition lies when the fit does not exist (either side may be None: unbounded).
    """

    intercept: Optional[float] = None
    slope: Optional[float] = None
    covariance: Optional[np.ndarray] = None
    reason: str = ""
    bracket: tuple = (None, None)
    iterations: int = 0
    clusters: Optional[int] = None  #: instances of a cluster-robust covariance; None: binomial covariance

    @property
    def dof(self) -> Optional[int]:
        """Degrees of freedom of the t quantile (clusters - 1), None for the normal quantile."""
        return None if self.clusters is None else self.clusters - 1

    @property
    def ok(self) -> bool:
        """Whether a fit exists (else ``reason`` says why and ``bracket`` where the transition lies)."""
        return self.intercept is not None

    def success_at(self, k: ArrayLike) -> np.ndarray:
        """Fitted success probability expit(b0 + b1 ln k) at ``k`` (projected dimensions, any shape;
        the result has the same shape, values in (0, 1))."""
        return special.expit(self.intercept + self.slope * np.log(np.asarray(k, dtype=float)))

    def log_k_at(self, rate: float) -> float:
        """ln k where the fitted success equals ``rate`` (0 < rate < 1): (logit(rate) - b0) / b1."""
        return (special.logit(rate) - self.intercept) / self.slope

    def k_at(self, rate: float, confidence: float = 0.95) -> tuple[float, float, float]:
        """(k, low, high): k at the given success rate with its delta-method interval (units of k).

        ``confidence`` is two-sided, in (0, 1). The gradient of g = (logit(rate) - b0) / b1 is (-1/b1, -g/b1); the variance of g is
        grad' Cov grad; the interval is exp(g -/+ z sd) with z the two-sided normal quantile.
        """
        g = self.log_k_at(rate)
        gradient = np.array([-1.0 / self.slope, -g / self.slope])
        sd = float(np.sqrt(max(gradient @ self.covariance @ gradient, 0.0)))
        q = 0.5 + confidence / 2.0
        z = stats.norm.ppf(q) if self.dof is None else stats.t.ppf(q, self.dof)
        return float(np.exp(g)), float(np.exp(g - z * sd)), float(np.exp(g + z * sd))


def separation(k: ArrayLike, successes: ArrayLike, trials: ArrayLike) -> Optional[tuple[str, tuple]]:
    """(reason, bracket) when no finite maximum-likelihood fit exists, else None.

    ``k``, ``successes`` and ``trials`` have one value per swept k (shape (K,), any order); the
    bracket is (low, high) in units of k, either side None when unbounded (Albert & Anderson 1984).

    >>> separation([4, 8, 16], [0, 0, 5], [5, 5, 5])[0]
    'complete separation: every trial fails up to k=8 and succeeds from k=16; the transition lies between'
    >>> separation([4, 8, 16], [0, 2, 5], [5, 5, 5])[1]
    (8.0, 8.0)
    >>> separation([4, 8, 16], [1, 2, 5], [5, 5, 5]) is None
    True
    >>> separation([200, 800], [2, 0], [2, 2])[0].split(":")[0]
    'reversed separation'
    """
    k = np.asarray(k, dtype=float)
    successes = np.asarray(successes, dtype=float)
    failures = np.asarray(trials, dtype=float) - successes
    if np.unique(k).size < 2:
        return "only one swept k: no slope to fit", (None, None)
    if successes.sum() == 0:
        return "no success at any swept k: the transition lies above the grid", (float(k.max()), None)
    if failures.sum() == 0:
        return "every trial succeeds: the transition lies below the grid", (None, float(k.min()))
    highest_failure = float(k[failures > 0].max())
    lowest_success = float(k[successes > 0].min())
    if highest_failure < lowest_success:
        return (f"complete separation: every trial fails up to k={highest_failure:g} and succeeds from "
                f"k={lowest_success:g}; the transition lies between"), (highest_failure, lowest_success)
    if highest_failure == lowest_success:
        return (f"quasi-complete separation: k={lowest_success:g} is the only k with both outcomes; the "
                f"transition lies there"), (lowest_success, lowest_success)
    highest_success, lowest_failure = float(k[successes > 0].max()), float(k[failures > 0].min())
    if highest_success <= lowest_failure:  # success only at the smaller k (e.g. larger k hit the time limit)
        return (f"reversed separation: trials succeed only up to k={highest_success:g} and fail from "
                f"k={lowest_failure:g} (larger projected problems failing, e.g. at the time limit): no "
                f"increasing fit"), (lowest_failure, highest_success)
    return None


def fit_logistic(k: ArrayLike, successes: ArrayLike, trials: ArrayLike) -> LogisticFit:
    """Maximum-likelihood fit of P(success | k) = expit(b0 + b1 ln k) from binomial counts per k.

    ``k`` (projected dimensions, > 0), ``successes`` and ``trials`` (counts) have shape (K,), one
    value per swept k. Newton–Raphson (IRLS) on ln k centred at its trial-weighted mean; the
    covariance of (b0, b1) is the inverse Fisher information (McCullagh & Nelder, "Generalized Linear
    Models", 2nd ed., 1989, chapters 2 and 4). No fit (``ok`` False, with the reason) under
    separation (:func:`separation`), non-convergence or a slope <= 0.

    Checked against statsmodels (``GLM(..., family=Binomial())`` on the same counts: b0 = -6.40108,
    b1 = 2.89522, k50 = exp(-b0 / b1) = 9.12402):

    >>> fit = fit_logistic([4, 8, 16, 32], [1, 4, 8, 10], [10, 10, 10, 10])
    >>> round(fit.intercept, 5), round(fit.slope, 5), round(float(fit.k_at(0.5)[0]), 3)
    (-6.40108, 2.89522, 9.124)
    """
    k = np.asarray(k, dtype=float)
    successes = np.asarray(successes, dtype=float)
    trials = np.asarray(trials, dtype=float)
    separated = separation(k, successes, trials)
    if separated is not None:
        reason, bracket = separated
        return LogisticFit(reason=reason, bracket=bracket)
    # centre ln k for conditioning; map back at the end
    x = np.log(k)
    centre = float(np.average(x, weights=trials))
    design = np.column_stack([np.ones_like(x), x - centre])
    beta = np.zeros(2)
    for iteration in range(1, _MAX_ITERATIONS + 1):
        p = special.expit(design @ beta)
        weights = trials * p * (1 - p)
        information = design.T @ (design * weights[:, None])
        step = np.linalg.solve(information, design.T @ (successes - trials * p))
        beta = beta + step
        if np.max(np.abs(step)) < _STEP_TOLERANCE:
            break
    else:
        return LogisticFit(reason=f"Newton iterations did not converge in {_MAX_ITERATIONS} steps")
    p = special.expit(design @ beta)
    information = design.T @ (design * (trials * p * (1 - p))[:, None])
    shift = np.array([[1.0, -centre], [0.0, 1.0]])  # (b0, b1) = shift @ (c0, c1)
    covariance = shift @ np.linalg.inv(information) @ shift.T
    intercept, slope = shift @ beta
    if slope <= 0:
        return LogisticFit(reason=f"fitted success does not rise with k (slope {slope:.3g}): no transition to locate")
    return LogisticFit(float(intercept), float(slope), covariance, iterations=iteration)


def fit_clustered(k: ArrayLike, success: ArrayLike, cluster: ArrayLike) -> LogisticFit:
    """Pooled fit of success on ln k with the cluster-robust covariance over ``cluster`` (module text).

    One value per trial, shape (T,) each: its k (projected dimension), its 0/1 success and its
    instance (any labels, compared as text). None of the fit's numbers change but the covariance,
    H^-1 (G/(G-1) sum_g s_g s_g') H^-1 (Liang & Zeger 1986; Cameron & Miller 2015);
    with one instance the fit keeps the binomial covariance (``clusters`` None): its intervals hold
    for that instance only.

    >>> fit = fit_clustered([4, 8, 16, 4, 8, 16], [0, 1, 1, 1, 0, 1], ["a", "a", "a", "b", "b", "b"])
    >>> fit.ok, fit.clusters
    (True, 2)

    Checked against statsmodels (``GLM(..., family=Binomial()).fit(cov_type="cluster",
    cov_kwds={"groups": ..., "use_correction": False})``, whose covariance times G/(G-1) = 3/2 is
    this one: var(b1) = 2.91096):

    >>> fit = fit_clustered([4, 8, 16] * 3, [0, 1, 1, 1, 0, 1, 0, 0, 1], list("aaabbbccc"))
    >>> round(fit.slope, 5), round(float(fit.covariance[1, 1]), 5)
    (2.37114, 2.91096)
    """
    k = np.asarray(k, dtype=float)
    success = np.asarray(success, dtype=float)
    ks, k_index = np.unique(k, return_inverse=True)
    groups, g_index = np.unique(np.asarray(cluster).astype(str), return_inverse=True)
    trials_k = np.bincount(k_index, minlength=ks.size).astype(float)
    successes_k = np.bincount(k_index, weights=success, minlength=ks.size)
    fit = fit_logistic(ks, successes_k, trials_k)
    if not fit.ok:
        return fit
    if groups.size < 2:
        return fit  # one instance: the binomial covariance is the right one for it (and says nothing of a class)
    design = np.column_stack([np.ones_like(k), np.log(k)])
    p = special.expit(design @ np.array([fit.intercept, fit.slope]))
    information = design.T @ (design * (p * (1 - p))[:, None])
    scores = np.zeros((groups.size, 2))
    np.add.at(scores, g_index, design * (success - p)[:, None])
    meat = groups.size / (groups.size - 1.0) * (scores.T @ scores)
    bread = np.linalg.inv(information)
    return LogisticFit(fit.intercept, fit.slope, bread @ meat @ bread, iterations=fit.iterations, clusters=int(groups.size))
