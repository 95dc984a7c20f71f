"""A policy rule certified for a class of instances of different sizes: k = f * m.

A team's class is often a folder of its own models of different sizes (family ``mps-dir`` given a
folder alone). A single k cannot serve them all, but a rule can: k as a fraction f of each model's
projected dimension m. When the spec sweeps k as fractions of m (``k = {fractions = [...]}``), the
trials of every file at fraction f are the rule's trials at f, and the class claim is made with the
*units* (the files; the instances for random families) as the clusters, by the same class-scope
bound as a cell (:func:`calib.analysis.scope.class_scope`: a Clopper–Pearson bound with the design
effect of the intraclass correlation's upper limit; a binomial on units when each unit decides
alone). The smallest certified fraction follows the monotone rule over the swept fractions (every
larger fraction passes too). The units whose own success rate at that fraction (or, when none is
certified, at the largest) is below the target are listed.

"k = 0.3 m meets the target on this class at 95% confidence" is then a statement about the class
the files were drawn from, with the files as the unit; like every safe k it is empirical evidence,
not a proof. Costs: O(trials + fractions x units). The rule k = C ln n is not offered (the spec has
no grid that sets k from ln n alone).
"""

from __future__ import annotations

from typing import Optional

import numpy as np

from calib.analysis.cells import safe_k_rule
from calib.analysis.scope import class_scope, cell_counts, instances_needed, refusal

PREFIX = "fraction="
RULE = "k = f m"


def fractions_of(labels) -> Optional[np.ndarray]:
    """The fraction f of each trial from its k label ("fraction=0.3"); None unless all have one.

    >>> fractions_of(["fraction=0.3", "fraction=1.0"]).tolist(), fractions_of(["", "fraction=0.3"])
    ([0.3, 1.0], None)
    """
    labels = list(labels)
    if not labels or not all(isinstance(label, str) and label.startswith(PREFIX) for label in labels):
        return None
    return np.array([float(label[len(PREFIX):]) for label in labels])


def fraction_rule(labels, unit, success, unit_name: dict, target: float, confidence: float, unit_word: str) -> dict:
    """The smallest certified fraction f of the rule k = f m over the units of a class (module text).

    ``labels``, ``unit`` and ``success`` have one value per trial; ``unit_name`` maps a unit id to
    the text listed for it (a file name).
    """
    fractions = fractions_of(labels)
    empty = {"rule": RULE, "fraction": None, "statement": "", "unit": unit_word, "units": 0,
             "units_needed": instances_needed(target, confidence), "failing": [], "failing_at": None, "grid": []}
    if fractions is None:
        return empty | {"reason": "the spec's k are not fractions of m (sweep k = {fractions = [...]}): no rule to certify"}
    counts = cell_counts(fractions, unit, success)
    units = counts.n_instances
    if units < 2:
        return empty | {"units": units, "reason": f"one {unit_word}: a rule across a class needs several"}
    klass = class_scope(counts, confidence)
    passes = klass.lower >= target
    index, reason = safe_k_rule(np.arange(counts.ks.size), passes)
    chosen = None if index is None else float(counts.ks[index])
    at = index if index is not None else counts.ks.size - 1
    rates = counts.successes[at] / np.maximum(counts.trials[at], 1)
    failing = sorted(unit_name.get(name, name) for name, rate, trials in
                     zip(counts.instances, rates, counts.trials[at]) if trials and rate < target)
    level = f"{target:.0%} at {confidence:.0%} confidence"
    if chosen is not None:
        statement = f"k = {chosen:g} m meets the target {level} on this class ({units} {unit_word}s as the unit)"
    else:
        limit = refusal(units, target, confidence)
        reason = limit.replace("instance", unit_word) if limit else f"{reason} for the class"
        statement = f"no swept fraction f makes k = f m meet the target {level} on this class: {reason}"
    grid = [{"fraction": float(f), "trials": int(counts.trials[i].sum()), "successes": int(counts.successes[i].sum()),
             "units": int((counts.trials[i] > 0).sum()), "class_lower_bound": float(f"{klass.lower[i]:.6g}"),
             "passes": bool(passes[i])} for i, f in enumerate(counts.ks)]
    return {"rule": RULE, "fraction": chosen, "reason": "" if chosen is not None else reason, "statement": statement,
            "unit": unit_word, "units": units, "units_needed": instances_needed(target, confidence),
            "failing": failing, "failing_at": float(counts.ks[at]), "grid": grid}
