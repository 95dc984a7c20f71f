"""What a k search certifies: the ``[target]`` table of a spec, read into a :class:`SearchTarget`.

A k search (``sweep.k = {search = ...}``) stops at the smallest k whose success rate is at least
1 - ``delta`` under a success rule, claimed at ``confidence`` (docs/spec.md, ``[target]``):

    [target]
    preset = "bound"     # a preset of calib.verdicts.success (default "bound")
    tolerance = 0.05     # its primary tolerance tau, > 0 (omit for "classify")
    delta = 0.1          # in (0, 1): target success rate 1 - delta (default 0.1)
    confidence = 0.95    # in (0, 1) (default 0.95)

Only a search reads the table, so it is refused without one and required with one.
:func:`stored_target` reads it back from a store's stored spec (the parsed TOML) without
validating the rest of the spec, which is how the tables take a search's own rule as their
default. Costs: O(1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

from calib.checks import is_real
from calib.errors import InputError
from calib.spec_problems import ProblemList
from calib.verdicts.success import PRESETS, Predicate, make_predicate, with_tau


@dataclass(frozen=True)
class SearchTarget:
    """What a k search certifies: success rate >= 1 - ``delta`` under ``predicate``, at ``confidence``."""

    predicate: Predicate
    delta: float
    confidence: float

    @property
    def rate(self) -> float:
        return 1.0 - self.delta


#: keys of the [target] table
_TARGET_KEYS = {"preset", "tolerance", "delta", "confidence"}


def parse_target(value, is_search: bool, errors: ProblemList) -> Optional[SearchTarget]:
    """The ``[target]`` table: required by a k search (``is_search``), refused without one (nothing else reads it)."""

    if value is None:
        if is_search:
            errors.add("target", "missing table: a k search needs its success rule at run time",
                       'add [target] with preset = "bound", tolerance = 0.05, delta = 0.1, confidence = 0.95')
        return None
    if not isinstance(value, dict):
        errors.add("target", f"must be a table, got {type(value).__name__}", "write it as [target]")
        return None
    if not is_search:
        errors.add("target", "only a k search reads [target]", "remove [target], or set k = {search = {low = ..., high = ...}}")
        return None
    errors.unknown_keys(value, _TARGET_KEYS, "target")
    preset = value.get("preset", "bound")
    if not isinstance(preset, str) or preset not in PRESETS:
        errors.add("target.preset", f"unknown preset {preset!r}", f"choose one of {', '.join(sorted(PRESETS))}")
        return None
    predicate = make_predicate(preset)
    if "tolerance" in value:
        tolerance = value["tolerance"]
        if not is_real(tolerance) or not (math.isfinite(tolerance) and tolerance > 0):
            errors.add("target.tolerance", f"must be a positive number, got {tolerance!r}", "e.g. tolerance = 0.05")
            return None
        try:
            predicate = with_tau(predicate, float(tolerance))
        except InputError:
            errors.add("target.tolerance", f"preset {preset!r} has no tolerance", "remove tolerance or choose another preset")
            return None
    numbers = {}
    for key, default, example in (("delta", 0.1, "0.1 for a 90% success target"), ("confidence", 0.95, "0.95")):
        number = value.get(key, default)
        if not is_real(number) or not 0 < number < 1:
            errors.add(f"target.{key}", f"must lie in (0, 1), got {number!r}", f"e.g. {key} = {example}")
            return None
        numbers[key] = float(number)
    return SearchTarget(predicate, numbers["delta"], numbers["confidence"])


def stored_target(raw_spec: dict) -> Optional[SearchTarget]:
    """The :class:`SearchTarget` of a stored spec (the parsed TOML of a k search), None when the spec
    ran no k search or its ``[target]`` no longer reads (a spec `calib run` accepted always reads)."""
    sweep = raw_spec.get("sweep")
    k = sweep.get("k") if isinstance(sweep, dict) else None
    if not (isinstance(k, dict) and "search" in k):
        return None
    problems = ProblemList()
    target = parse_target(raw_spec.get("target"), True, problems)
    return None if problems.problems else target
