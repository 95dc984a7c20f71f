"""Two scopes of a safe k: for the instances measured, and for the class they were drawn from.

Trials of one cell are clustered: every instance is measured at every k, ``r`` times (replicates).
Two questions have two answers.

*For these instances* (conditional on the instances measured): the trials at one k are independent
draws of the projection, so the one-sided Clopper–Pearson bound on all x successes of the N trials
is exact (:func:`calib.verdicts.stats.clopper_pearson_lower`).

*For the class* (the instances are a sample of the family's instances): the class-wide success
probability at k is the mean over instances of each instance's own rate, and trials of one
instance share that instance's rate. The count is adjusted for this clustering by the design
effect (Kish 1965) in the way of Rao & Scott (1992): N trials with average cluster size
``m_bar = sum(N_i^2) / N`` carry the information of ``N / D`` independent trials, with

    D = 1 + (m_bar - 1) * rho_U,

and the Clopper–Pearson bound is taken on ``(x / D, N / D)`` (the beta quantile accepts the
non-integer counts). ``rho_U`` is the one-sided upper confidence limit, at the table's confidence,
of the intraclass correlation rho from the one-way analysis of variance of the 0/1 outcomes with
instances as groups (Searle 1971; Donner 1986): with F = MSB / MSW and n0 the average group size,

    rho_U = (F / F_low - 1) / (F / F_low + n0 - 1),   F_low = the (1 - confidence) quantile of
                                                         F(instances - 1, df_within),

clamped to [0, 1]. The sums of squares and their degrees of freedom are pooled over the swept k
where the outcomes vary (a k where every trial succeeds, or every trial fails, says nothing about
rho), but the F quantile takes the between-instance degrees of freedom of the instances
(instances - 1), not one set per k: the same instances are seen at every k, so more k do not make
more instances (a conservative choice). When no k varies, or no
instance varies within itself (MSW = 0: every instance decides alone), rho_U = 1.

This is conservative by construction, and it keeps an honest floor: with rho_U = 1 and equal
replicates, N / D is the number of instances, so the bound is the Clopper–Pearson bound on
instances. 29 of 29 instances are then needed to certify 0.9 at 95% (0.05^(1/29) = 0.902), and a
design with fewer instances than :func:`instances_needed` cannot claim the class unless its
instances agree closely (rho_U small). With one replicate, D = 1 and the class bound is exact.

Costs: O(instances x k) per cell. The k50 and k-at-target intervals of the clustered scope come
from the cluster-robust covariance of the logistic fit (:func:`calib.analysis.logistic.fit_clustered`).

References: L. Kish, *Survey Sampling*, Wiley, 1965 (design effect); J. N. K. Rao and A. J. Scott,
"A simple method for the analysis of clustered binary data", Biometrics 48(2):577–585, 1992;
S. R. Searle, *Linear Models*, Wiley, 1971, §9.7 (confidence interval of the intraclass
correlation); A. Donner, "A review of inference procedures for the intraclass correlation
coefficient in the one-way random effects model", International Statistical Review 54(1):67–82,
1986.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np
from scipy import special

from calib.verdicts.stats import clopper_pearson_lower
from calib.wording import counted


@dataclass(frozen=True)
class CellCounts:
    """Successes and trials of one cell per (k, instance): arrays of shape (len(ks), len(instances))."""

    ks: np.ndarray
    instances: np.ndarray
    successes: np.ndarray
    trials: np.ndarray

    @property
    def n_instances(self) -> int:
        """Instances with at least one trial in the cell."""
        return int((self.trials.sum(axis=0) > 0).sum())


def cell_counts(k, instance, success) -> CellCounts:
    """Counts per (k, instance) from one row per trial (k, instance id, 0/1 success).

    >>> counts = cell_counts([4, 4, 8, 8, 8], ["a", "b", "a", "a", "b"], [0, 1, 1, 1, 0])
    >>> counts.successes.tolist(), counts.trials.tolist()
    ([[0, 1], [2, 0]], [[1, 1], [2, 1]])
    """
    ks, k_index = np.unique(np.asarray(k), return_inverse=True)
    instances, i_index = np.unique(np.asarray(instance).astype(str), return_inverse=True)
    successes = np.zeros((ks.size, instances.size), dtype=np.int64)
    trials = np.zeros_like(successes)
    np.add.at(trials, (k_index, i_index), 1)
    np.add.at(successes, (k_index, i_index), np.asarray(success, dtype=np.int64))
    return CellCounts(ks, instances, successes, trials)


@dataclass(frozen=True)
class Anova:
    """Pooled one-way analysis of variance of the 0/1 outcomes, instances as groups.

    ``df_between`` and ``df_within`` are pooled over the k used (they make the mean squares);
    ``groups`` is the number of instances, whose ``groups - 1`` degrees of freedom size the
    confidence limit (module text).
    """

    ss_between: float
    ss_within: float
    df_between: int
    df_within: int
    n0: float
    groups: int

    def _mean_squares(self) -> Optional[tuple[float, float]]:
        if self.df_within <= 0 or self.df_between <= 0 or self.groups < 2:
            return None
        return self.ss_between / self.df_between, self.ss_within / self.df_within

    def rho(self) -> Optional[float]:
        """Point estimate (MSB - MSW) / (MSB + (n0 - 1) MSW), clamped to [0, 1]; None without data."""
        squares = self._mean_squares()
        if squares is None or squares[0] + (self.n0 - 1.0) * squares[1] <= 0:
            return None
        msb, msw = squares
        return float(min(1.0, max(0.0, (msb - msw) / (msb + (self.n0 - 1.0) * msw))))

    def rho_upper(self, confidence: float) -> float:
        """One-sided upper confidence limit of rho (module text); 1 when the data cannot bound it.

        >>> round(Anova(2.0, 20.0, 9, 90, 10.0, 10).rho_upper(0.95), 4)  # F = 1, F(9, 90) 5% quantile 0.3622
        0.1497
        >>> Anova(1.0, 0.0, 2, 27, 10.0, 3).rho_upper(0.95)  # every instance decides alone
        1.0
        """
        squares = self._mean_squares()
        if squares is None or squares[1] <= 0:
            return 1.0
        f_low = float(special.fdtri(self.groups - 1, self.df_within, 1.0 - confidence))  # the F quantile
        ratio = squares[0] / squares[1] / f_low
        return float(min(1.0, max(0.0, (ratio - 1.0) / (ratio + self.n0 - 1.0))))

    def as_dict(self) -> dict:
        """The sums of squares, degrees of freedom, n0 and instance count, JSON-ready."""
        return {"ss_between": self.ss_between, "ss_within": self.ss_within, "df_between": self.df_between,
                "df_within": self.df_within, "n0": self.n0, "instances": self.groups}


def pooled_anova(counts: CellCounts) -> Anova:
    """Sums of squares and degrees of freedom pooled over the k where the outcomes vary.

    For 0/1 outcomes the within sum of squares of instance i is S_i - S_i^2 / N_i and the between
    sum is sum_i N_i (p_i - p)^2; n0 = (N - sum N_i^2 / N) / (instances - 1) is the usual
    average group size of an unbalanced design (Searle 1971), averaged over the k used.
    """
    ss_between = ss_within = 0.0
    df_between = df_within = 0
    n0_values = []
    for successes, trials in zip(counts.successes.astype(float), counts.trials.astype(float)):
        present = trials > 0
        s, n = successes[present], trials[present]
        total, hits = n.sum(), s.sum()
        if present.sum() < 2 or hits in (0.0, total):
            continue
        rates = s / n
        ss_between += float((n * (rates - hits / total) ** 2).sum())
        ss_within += float((s - s**2 / n).sum())
        df_between += int(present.sum() - 1)
        df_within += int(total - present.sum())
        n0_values.append((total - (n**2).sum() / total) / (present.sum() - 1))
    if not n0_values:
        return Anova(0.0, 0.0, 0, 0, 1.0, counts.n_instances)
    return Anova(ss_between, ss_within, df_between, df_within, float(np.mean(n0_values)), counts.n_instances)


def mean_cluster_size(trials: np.ndarray) -> np.ndarray:
    """Per k: sum(N_i^2) / sum(N_i), the cluster size of the design effect (= r when balanced)."""
    trials = np.asarray(trials, dtype=float)
    total = trials.sum(axis=-1)
    return np.where(total > 0, (trials**2).sum(axis=-1) / np.maximum(total, 1.0), 1.0)


def class_lower_bound(successes, trials, cluster_size, rho_upper: float, confidence: float):
    """Clopper–Pearson bound on (x / D, N / D) with D = 1 + (cluster_size - 1) rho_upper, per k.

    >>> round(float(class_lower_bound(30, 30, 1.0, 1.0, 0.95)), 6)  # one replicate: plain binomial
    0.904966
    >>> round(float(class_lower_bound(290, 290, 10.0, 1.0, 0.95)), 6)  # rho_U = 1: 29 instances
    0.901855
    """
    successes, trials = np.asarray(successes, dtype=float), np.asarray(trials, dtype=float)
    effect = 1.0 + (np.asarray(cluster_size, dtype=float) - 1.0) * rho_upper
    return clopper_pearson_lower(successes / effect, trials / effect, confidence)


def instances_needed(target: float, confidence: float) -> int:
    """Fewest instances that can certify ``target`` when each instance decides alone: the smallest n
    whose Clopper–Pearson bound with n of n successes, (1 - confidence)^(1/n), reaches ``target``.

    >>> instances_needed(0.9, 0.95)
    29
    >>> instances_needed(0.95, 0.95)
    59
    """
    return int(math.ceil(math.log(1.0 - confidence) / math.log(target) - 1e-12))


def trials_needed(target: float, confidence: float) -> int:
    """Fewest trials that can certify ``target`` for the instances measured (all succeed); same law."""
    return instances_needed(target, confidence)


def refusal(n_instances: int, target: float, confidence: float) -> str:
    """Why a class claim is out of reach of ``n_instances`` instances, or '' when it is not.

    >>> refusal(3, 0.9, 0.95)
    '3 instances cannot certify 90% at 95% confidence for the class unless they agree closely; when each instance decides alone, 29 are needed'
    """
    needed = instances_needed(target, confidence)
    if n_instances >= needed:
        return ""
    if n_instances == 1:
        return f"1 instance says nothing about the class; when each instance decides alone, {needed} are needed"
    return (f"{n_instances} instance{'s' if n_instances != 1 else ''} cannot certify {target:.0%} at {confidence:.0%} "
            f"confidence for the class unless they agree closely; when each instance decides alone, {needed} are needed")


def class_reason(safe_k: Optional[int], reason: str, n_instances: int, target: float, confidence: float,
                 instances_reason: Optional[str] = None) -> str:
    """The reason shown beside the class safe k: the data's when even the instances measured have no
    safe k (``instances_reason``; more instances would not help), else the design's limit first when
    it explains it.

    >>> class_reason(None, "no swept k reaches the target", 7, 0.9, 0.95, "no swept k reaches the target")
    'no swept k reaches the target, already for the instances measured'
    """
    if safe_k is not None:
        return reason
    if instances_reason is not None:
        return f"{instances_reason}, already for the instances measured"
    limit = refusal(n_instances, target, confidence)
    return limit or f"{reason} for the class (instance-to-instance spread counted)"


@dataclass(frozen=True)
class ClassScope:
    """The class-scope statistics of one cell: per k bounds, and the intraclass correlation used."""

    lower: np.ndarray
    effective_trials: np.ndarray
    cluster_size: np.ndarray
    rho: Optional[float]
    rho_upper: float
    anova: Anova


def design_rho(anova: Anova, cluster_size, confidence: float) -> float:
    """The rho_U of the design effect: 0 when every instance has one trial per k (no clustering)."""
    return 0.0 if np.all(np.asarray(cluster_size) <= 1.0) else anova.rho_upper(confidence)


def class_scope(counts: CellCounts, confidence: float) -> ClassScope:
    """Per-k class lower bounds of one cell (module text)."""
    anova = pooled_anova(counts)
    size = mean_cluster_size(counts.trials)
    rho_upper = design_rho(anova, size, confidence)
    successes, trials = counts.successes.sum(axis=1), counts.trials.sum(axis=1)
    lower = class_lower_bound(successes, trials, size, rho_upper, confidence)
    effective = trials / (1.0 + (size - 1.0) * rho_upper)
    return ClassScope(lower, effective, size, anova.rho(), rho_upper, anova)


def design_advice(instances: int, replicates: int, target: float, confidence: float) -> dict:
    """What a design of ``instances`` x ``replicates`` trials per k can certify, before any trial runs.

    - for the instances measured: all instances x replicates trials at a k must be able to reach
      the target, so instances x replicates >= :func:`trials_needed`; else the smallest change is
      more replicates;
    - for the class: sure only with at least :func:`instances_needed` instances (each instance may
      decide alone); with fewer, only when the instances turn out to agree closely, which needs
      rho_U <= (instances x replicates / needed - 1) / (replicates - 1); impossible with one
      replicate. The smallest change is more instances.

    >>> advice = design_advice(3, 10, 0.9, 0.95)
    >>> advice["instances_ok"], advice["class_sure"], advice["class_possible"], advice["instances_to_add"]
    (True, False, True, 26)
    >>> design_advice(10, 1, 0.9, 0.95)["replicates_needed"]
    3
    """
    needed = instances_needed(target, confidence)
    trials = instances * replicates
    rho_max = None
    if instances < needed and replicates > 1 and trials >= needed:
        rho_max = (trials / needed - 1.0) / (replicates - 1.0)
    return {"instances": instances, "replicates": replicates, "needed": needed,
            "instances_ok": trials >= needed, "replicates_needed": int(math.ceil(needed / instances)),
            "class_sure": instances >= needed, "class_possible": instances >= needed or rho_max is not None,
            "class_rho_max": rho_max, "instances_to_add": max(0, needed - instances)}


def advice_text(advice: dict, target: float, confidence: float) -> str:
    """One line of :func:`design_advice` for the dry run and the run's warning.

    >>> advice_text(design_advice(3, 10, 0.9, 0.95), 0.9, 0.95)
    'these instances: can certify 90% at 95% (30 trials per k); the class: only if the 3 instances agree closely (intraclass correlation upper limit <= 0.0038); sure with 29 instances (add 26)'
    """
    needed = advice["needed"]
    level = f"{target:.0%} at {confidence:.0%}"
    trials = advice["instances"] * advice["replicates"]
    if advice["instances_ok"]:
        mine = f"these instances: can certify {level} ({trials} trials per k)"
    else:
        mine = (f"these instances: cannot certify {level} ({trials} trials per k, {needed} needed): "
                f"use replicates = {advice['replicates_needed']}")
    if advice["class_sure"]:
        klass = f"the class: can certify {level} ({advice['instances']} instances >= {needed})"
    elif advice["class_possible"]:
        klass = (f"the class: only if the {advice['instances']} instances agree closely (intraclass correlation upper "
                 f"limit <= {advice['class_rho_max']:.2g}); sure with {needed} instances (add {advice['instances_to_add']})")
    else:
        klass = (f"the class: cannot certify {level} with {counted(advice['instances'], 'instance')} x "
                 f"{counted(advice['replicates'], 'replicate')}; use instances = {needed} (add {advice['instances_to_add']})")
    return f"{mine}; {klass}"
