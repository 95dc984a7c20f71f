"""The safe-k rule: the smallest swept k certified, and the claim it is certified for (numpy only).

- :class:`Confidence`: the target success rate 1 - delta and the confidence level of a claim
  (both in (0, 1));
- :func:`safe_k_rule`: the monotone rule on a grid k_1 < ... < k_G with a pass/fail verdict per k
  (a lower confidence bound reaching the target): the safe k is k_j for the smallest j with
  k_j, ..., k_G all passing, none when k_G fails (common practice for a monotone acceptance
  criterion);
- :func:`censoring`: why a size's safe k is not a value a law across sizes may fit (no safe k,
  the projected dimension m, every swept k passing: an upper bound).

This is the one home of the rule: the k search (:mod:`calib.sweep.search`), the tables
(:mod:`calib.analysis.tables`), the class rules and the lookup all import it from here, and reading
a table with it imports neither pandas nor ``scipy.stats``. Costs: O(G) per call.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np

from calib.errors import InputError

ALL_PASS = "all swept k pass: the safe k may be smaller than the grid shows"


def safe_k_rule(ks, passes) -> tuple[Optional[int], str]:
    """The monotone safe-k rule on a grid sorted by k: (safe k or None, reason).

    >>> safe_k_rule([4, 8, 16, 32], [True, False, True, True])
    (16, '')
    >>> safe_k_rule([4, 8], [False, False])
    (None, 'no swept k reaches the target')
    """
    ks, passes = np.asarray(ks), np.asarray(passes, dtype=bool)
    if not passes[-1]:
        reason = "no swept k reaches the target" if not passes.any() else "the largest swept k misses the target"
        return None, reason
    failing = np.flatnonzero(~passes)
    first = failing[-1] + 1 if failing.size else 0
    return int(ks[first]), (ALL_PASS if first == 0 else "")


@dataclass(frozen=True)
class Confidence:
    """Target success rate 1 - delta, claimed at the given confidence level."""

    delta: float = 0.1
    level: float = 0.95

    def __post_init__(self) -> None:
        if not 0.0 < self.delta < 1.0:
            raise InputError("--delta", f"must lie in (0, 1), got {self.delta!r}", "e.g. 0.1 for a 90% success target")
        if not 0.0 < self.level < 1.0:
            raise InputError("--confidence", f"must lie in (0, 1), got {self.level!r}", "e.g. 0.95")

    @property
    def target(self) -> float:
        return 1.0 - self.delta


def censoring(value, reason: str, projected_dim: int) -> str:
    """Why a size's value is not fitted as a value ('' when it is): none, no reduction, an upper bound.

    >>> censoring(None, "no swept k reaches the target", 40)
    'no safe k (no swept k reaches the target)'
    >>> censoring(40, "", 40)
    'the safe k is the projected dimension: no reduction'
    >>> censoring(12, "", 40)
    ''
    """
    if value is None:
        return f"no safe k ({reason})" if reason else "no value"
    if value >= projected_dim:
        return "the safe k is the projected dimension: no reduction"
    if reason == ALL_PASS:
        return "every swept k passes: the safe k is an upper bound"
    return ""
