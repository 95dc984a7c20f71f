"""The statistics of one cell, a pure function of its stored trials: both scopes and the transition.

Input: one row per trial of one (family, size, params, projector, retrieval) cell with its k, its
instance and its 0/1 success (solver errors already set aside, see :mod:`calib.analysis.tables`).
Output (:class:`CellStats`), per swept k and for the cell:

- *instances scope*: trials, successes, the one-sided Clopper–Pearson and Wilson lower bounds of
  the pooled count and the safe k of the monotone rule (:func:`calib.verdicts.saferule.safe_k_rule`): exact conditional on
  the instances measured;
- *class scope*: the design-effect-adjusted Clopper–Pearson bound of :mod:`calib.verdicts.scope`
  and its safe k by the same monotone rule, empty with the reason when the design cannot certify
  the target;
- the transition: a logistic fit of success on ln k (:mod:`calib.analysis.logistic`) with the
  cluster-robust covariance over instances, so the k50 and k-at-target intervals hold for the class.

This is the one place the tables, the lookup's recomputation and the calibration simulations get
these numbers from. Costs: O(trials + k x instances) per cell plus one logistic fit.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
from numpy.typing import ArrayLike

from calib.analysis.logistic import LogisticFit, fit_clustered
from calib.verdicts.saferule import safe_k_rule
from calib.verdicts.scope import CellCounts, ClassScope, cell_counts, class_reason, class_scope
from calib.verdicts.stats import clopper_pearson_lower, wilson_lower

@dataclass(frozen=True)
class CellStats:
    """Both scopes of one cell (arrays are per swept k, sorted by k)."""

    counts: CellCounts
    successes: np.ndarray
    trials: np.ndarray
    lower: np.ndarray
    wilson: np.ndarray
    passes: np.ndarray
    safe_k: Optional[int]
    reason: str
    klass: ClassScope
    class_passes: np.ndarray
    class_safe_k: Optional[int]
    class_reason: str
    fit: LogisticFit

    @property
    def ks(self) -> np.ndarray:
        """The swept k (projected dimensions), sorted, shape (K,)."""
        return self.counts.ks

    @property
    def instances_per_k(self) -> np.ndarray:
        """Instances with at least one trial at each swept k, shape (K,)."""
        return (self.counts.trials > 0).sum(axis=1)


def cell_stats(k: ArrayLike, instance: ArrayLike, success: ArrayLike, target: float, confidence: float) -> CellStats:
    """Both scopes and the clustered transition of one cell from one row per trial (module text).

    ``k`` (projected dimension), ``instance`` (its label) and ``success`` (0/1) have shape (T,), one
    value per trial; ``target`` (1 - delta) and ``confidence`` are probabilities in (0, 1).
    """
    counts = cell_counts(k, instance, success)
    successes, trials = counts.successes.sum(axis=1), counts.trials.sum(axis=1)
    lower = clopper_pearson_lower(successes, trials, confidence)
    passes = lower >= target
    safe_k, reason = safe_k_rule(counts.ks, passes)
    klass = class_scope(counts, confidence)
    class_passes = klass.lower >= target
    class_safe_k, why = safe_k_rule(counts.ks, class_passes)
    return CellStats(counts, successes, trials, lower, wilson_lower(successes, trials, confidence), passes, safe_k,
                     reason, klass, class_passes, class_safe_k,
                     class_reason(class_safe_k, why, counts.n_instances, target, confidence,
                                  reason if safe_k is None else None),
                     fit_clustered(k, success, instance))


__all__ = ["CellStats", "cell_stats"]
