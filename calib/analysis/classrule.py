"""Policy rules certified for a class of instances of different sizes: k = f m and k = C ln n.

A team's class is often a folder of its own models of different sizes (family ``mps-dir`` given a
folder alone). A single k cannot serve them all, but a rule can: k as a fraction f of each model's
projected dimension m, or as a multiple C of ln n (n the JL point count of each model). When the
spec sweeps k by the rule (``k = {fractions = [...]}``: k = ceil(f m); ``k = {log_multiples =
[...]}``: k = ceil(C ln n)), the trials of every file at the value f (or C) are the rule's trials at
that value, and the rule is answered at two scopes:

- **these units** (the files measured; :func:`units_rule`): the smallest swept value whose k meets
  the target on *every* unit at the stated confidence. Each unit's own trials at that value give a
  one-sided Clopper–Pearson bound at confidence 1 - (1 - confidence) / U for U units (Bonferroni:
  the U statements hold together at the stated confidence). A unit whose r trials all succeed
  passes when (alpha / U)^(1/r) >= target, so r >= ln(alpha / U) / ln(target) trials per unit are
  needed (39 for 3 files at 90% and 95%): for a file, that is its replicates.
- **the class** the units were drawn from (:func:`class_rule`): the units are the clusters of the
  class-scope bound of a cell (:func:`calib.verdicts.scope.class_scope`: a Clopper–Pearson bound
  with the design effect of the intraclass correlation's upper limit; a binomial on units when each
  unit decides alone), so 29 units that each pass are needed to certify 90% at 95%.

A value whose k exceeds a unit's m is not swept there (no reduction, see the spec's k grids): the
rule at that value does not cover that unit, so it is not certified for every unit.

At both scopes the smallest certified value follows the monotone rule over the swept values
(every larger value passes too); the units below the target at that value (or, when none is
certified, at the largest) are listed. "k = 0.3 m meets the target on this class at 95%
confidence" is a statement about the class the files were drawn from, with the files as the unit;
like every safe k it is empirical evidence, not a proof. Costs: O(trials + values x units).
"""

from __future__ import annotations

from typing import Iterable, Optional

import numpy as np
from numpy.typing import ArrayLike

from calib.verdicts.saferule import safe_k_rule
from calib.verdicts.scope import cell_counts, class_scope, instances_needed, refusal
from calib.verdicts.stats import clopper_pearson_lower, trials_per_unit_needed

PREFIX = "fraction="
RULE = "k = f m"
#: k label prefix -> (the rule, the name of its coefficient)
RULES = {"fraction=": (RULE, "f"), "log_multiple=": ("k = C ln n", "C")}
RULES_BY_NAME = {name: rule for rule, name in RULES.values()}
NOUNS = {"f": "fraction f", "C": "multiple C"}
NO_REDUCTION = "; k = m is no reduction"


def rule_text(coefficient: str, value: float) -> str:
    """The rule at one value of its coefficient.

    >>> rule_text("f", 0.3), rule_text("C", 4.0)
    ('k = 0.3 m', 'k = 4 ln n')
    """
    return f"k = {value:g} m" if coefficient == "f" else f"k = {value:g} ln n"


def values_of(labels: Iterable[str], prefix: str = PREFIX) -> Optional[np.ndarray]:
    """The value of each trial's rule from its k label ("fraction=0.3"); None unless all have one.

    One label per trial in, one float per trial out (shape (T,)): f (a fraction of m) or C (a
    multiple of ln n).

    >>> values_of(["fraction=0.3", "fraction=1.0"]).tolist(), values_of(["", "fraction=0.3"])
    ([0.3, 1.0], None)
    >>> values_of(["log_multiple=4"], "log_multiple=").tolist()
    [4.0]
    """
    labels = list(labels)
    if not labels or not all(isinstance(label, str) and label.startswith(prefix) for label in labels):
        return None
    return np.array([float(label[len(prefix):]) for label in labels])


def rule_prefix(labels: Iterable[str]) -> Optional[str]:
    """The prefix of :data:`RULES` every label starts with, else None."""
    labels = list(labels)
    return next((prefix for prefix in RULES if values_of(labels, prefix) is not None), None)


def _failing(counts, at: int, target: float, unit_name: dict) -> list[str]:
    rates = counts.successes[at] / np.maximum(counts.trials[at], 1)
    return sorted(unit_name.get(name, name) for name, rate, trials in
                  zip(counts.instances, rates, counts.trials[at]) if trials and rate < target)


def class_rule(values: ArrayLike, unit: ArrayLike, success: ArrayLike, unit_name: dict, target: float,
               confidence: float, unit_word: str, coefficient: str = "f") -> dict:
    """The smallest value of the rule certified for the class, the units as clusters (module text).

    ``values`` (the rule's f or C), ``unit`` and ``success`` (0/1) have one entry per trial, shape
    (T,); ``unit_name`` maps a unit id to the text listed for it (a file name); ``target`` and
    ``confidence`` are probabilities in (0, 1).
    """
    counts = cell_counts(values, unit, success)
    units = counts.n_instances
    empty = {"value": None, "statement": "", "units": units, "units_needed": instances_needed(target, confidence),
             "failing": [], "failing_at": None, "grid": []}
    if units < 2:
        return empty | {"reason": f"one {unit_word}: a rule across a class needs several"}
    klass = class_scope(counts, confidence)
    passes = klass.lower >= target
    index, reason = safe_k_rule(np.arange(counts.ks.size), passes)
    chosen = None if index is None else float(counts.ks[index])
    at = index if index is not None else counts.ks.size - 1
    level = f"{target:.0%} at {confidence:.0%} confidence"
    if chosen is not None:
        statement = (f"{rule_text(coefficient, chosen)} meets the target {level} on this class ({units} {unit_word}s as the unit)"
                     + (NO_REDUCTION if (coefficient, chosen) == ("f", 1.0) else ""))
    else:
        limit = refusal(units, target, confidence)
        reason = limit.replace("instance", unit_word) if limit else f"{reason} for the class"
        statement = f"no swept {NOUNS[coefficient]} makes {RULES_BY_NAME[coefficient]} meet the target {level} on this class: {reason}"
    grid = [{"value": float(v), "trials": int(counts.trials[i].sum()), "successes": int(counts.successes[i].sum()),
             "units": int((counts.trials[i] > 0).sum()), "class_lower_bound": float(f"{klass.lower[i]:.6g}"),
             "passes": bool(passes[i])} for i, v in enumerate(counts.ks)]
    return {"value": chosen, "reason": "" if chosen is not None else reason, "statement": statement, "units": units,
            "units_needed": instances_needed(target, confidence), "failing": _failing(counts, at, target, unit_name),
            "failing_at": float(counts.ks[at]), "grid": grid}


def units_rule(values: ArrayLike, unit: ArrayLike, success: ArrayLike, unit_name: dict, target: float,
               confidence: float, unit_word: str, coefficient: str = "f") -> dict:
    """The smallest value of the rule that meets the target on every unit measured (module text).

    Arguments as :func:`class_rule`; each unit's bound is the one-sided Clopper–Pearson bound at
    1 - (1 - confidence) / U (Bonferroni over U units; Clopper & Pearson 1934).
    """
    counts = cell_counts(values, unit, success)
    units = counts.n_instances
    each = 1.0 - (1.0 - confidence) / max(units, 1)
    needed = trials_per_unit_needed(max(units, 1), target, confidence)
    lower = clopper_pearson_lower(counts.successes, counts.trials, each)  # (values, units)
    measured = counts.trials > 0
    passes = np.all(measured & (lower >= target), axis=1)
    index, reason = safe_k_rule(np.arange(counts.ks.size), passes)
    chosen = None if index is None else float(counts.ks[index])
    at = index if index is not None else counts.ks.size - 1
    fewest = int(counts.trials.min()) if counts.trials.size else 0
    level = f"{target:.0%} at {confidence:.0%} confidence"
    if chosen is not None:
        statement = (f"{rule_text(coefficient, chosen)} meets the target {level} on each of these {units} {unit_word}s "
                     f"(Bonferroni: each {unit_word} at {each:.4g})" + (NO_REDUCTION if (coefficient, chosen) == ("f", 1.0) else ""))
    else:
        short = f"; {fewest} trials per {unit_word} at a value, {needed} needed when all succeed" if fewest < needed else ""
        reason = f"{reason} on every {unit_word}{short}"
        statement = f"no swept {NOUNS[coefficient]} makes {RULES_BY_NAME[coefficient]} meet the target {level} on every {unit_word}: {reason}"
    grid = [{"value": float(v), "trials": int(counts.trials[i].sum()), "successes": int(counts.successes[i].sum()),
             "units": int(measured[i].sum()), "lowest_unit_bound": float(f"{(lower[i][measured[i]].min() if measured[i].any() else 0.0):.6g}"),
             "passes": bool(passes[i])} for i, v in enumerate(counts.ks)]
    return {"value": chosen, "reason": "" if chosen is not None else reason, "statement": statement, "units": units,
            "unit_confidence": float(f"{each:.6g}"), "trials_per_unit": fewest, "trials_per_unit_needed": needed,
            "failing": _failing(counts, at, target, unit_name), "failing_at": float(counts.ks[at]), "grid": grid}


def folder_rules(labels: Iterable[str], unit: ArrayLike, success: ArrayLike, unit_name: dict, target: float,
                 confidence: float, unit_word: str) -> list[dict]:
    """The rule of the swept k grid at both scopes (module text); [] unless every k label is a rule's.

    One k label, unit and 0/1 success per trial, shape (T,); other arguments as :func:`class_rule`.
    """
    prefix = rule_prefix(labels)
    if prefix is None:
        return []
    rule, coefficient = RULES[prefix]
    values = values_of(labels, prefix)
    arguments = (values, unit, success, unit_name, target, confidence, unit_word, coefficient)
    return [{"rule": rule, "coefficient": coefficient, "unit": unit_word, "target": target, "confidence": confidence,
             "instances": units_rule(*arguments), "class": class_rule(*arguments)}]


def fraction_rule(labels: Iterable[str], unit: ArrayLike, success: ArrayLike, unit_name: dict, target: float,
                  confidence: float, unit_word: str) -> dict:
    """The class-scope rule k = f m in the table's ``policy_rule`` block (:func:`class_rule` with the
    value named ``fraction``)."""
    fractions = values_of(labels)
    empty = {"rule": RULE, "fraction": None, "statement": "", "unit": unit_word, "units": 0,
             "units_needed": instances_needed(target, confidence), "failing": [], "failing_at": None, "grid": []}
    if fractions is None:
        return empty | {"reason": "the spec's k are not fractions of m (sweep k = {fractions = [...]}): no rule to certify"}
    found = class_rule(fractions, unit, success, unit_name, target, confidence, unit_word)
    grid = [{"fraction": point["value"], **{key: value for key, value in point.items() if key != "value"}}
            for point in found["grid"]]
    return {"rule": RULE, "fraction": found["value"], "reason": found["reason"], "statement": found["statement"],
            "unit": unit_word, "units": found["units"], "units_needed": found["units_needed"], "failing": found["failing"],
            "failing_at": found["failing_at"], "grid": grid}
