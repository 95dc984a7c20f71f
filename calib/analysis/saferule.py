"""The safe-k rule and what a table's reader needs of it, with no heavy import (numpy only).

- :class:`Confidence`: the target 1 - delta and the confidence level of a claim;
- :func:`safe_k_rule`: the monotone rule on a grid sorted by k, the smallest swept k whose bound
  reaches the target while every larger swept k does too (common practice for a monotone
  acceptance criterion);
- :func:`censoring` and :func:`censored_law`: which sizes' values are censored (no safe k, the
  projected dimension, every swept k passing) and the law k = a + C ln n over the others
  (:mod:`calib.analysis.law`);
- :func:`class_namer`: the short text naming a class by the parameters that differ.

The tables (:mod:`calib.analysis.tables`) and the lookup (:mod:`calib.analysis.lookup`) share these,
so ``calib lookup`` reads a table without importing pandas or ``scipy.stats``. Costs: O(grid size).
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Optional

import numpy as np

from calib.analysis.law import Law, fit_law
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


def censored_law(n: list[int], values: list, censored: list[str]) -> Law:
    """The law k = a + C ln n over the uncensored sizes only (at least two needed)."""
    law = fit_law(n, [None if why else value for value, why in zip(values, censored)])
    if not law.ok and any(censored):
        return Law(reason=f"{law.reason} ({sum(map(bool, censored))} censored size(s) are not fitted as values)")
    return law


def class_namer(classes: list[dict]):
    """class_params -> short text naming only the parameters that differ between ``classes`` (the
    class_params of the items named, one dict each).

    A parameter left at None (its family's default, e.g. no low rank) reads "without KEY"; text values
    read without quotes.

    >>> name = class_namer([{"rank": 12, "cost": "c"}, {"rank": None, "cost": "c"}])
    >>> name({"rank": 12, "cost": "c"}), name({"rank": None, "cost": "c"})
    ('rank=12', 'without rank')
    """
    keys = sorted({key for params in classes for key in params})
    varying = [key for key in keys if len({json.dumps(params.get(key)) for params in classes}) > 1]

    def text(key: str, value) -> str:
        if value is None:
            return f"without {key}"
        return f"{key}={value}" if isinstance(value, str) else f"{key}={json.dumps(value)}"

    return lambda params: " ".join(text(key, params.get(key)) for key in varying)
