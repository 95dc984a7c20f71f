"""The answer per class, in a few numbers: what the report's cards and the text summary lead with.

A *class* is a family with its non-size parameters, a projector and a retrieval; its cells are its
sizes. For one analysis (one tolerance) of a table, :func:`class_answers` gathers per class:

- per size: m (the projected dimension), the instances measured, the safe k in each scope
  (class first, the default answer; then these instances) with k / m, and the policy k or the
  explicit "no k saves time" when the table carries the policy block;
- the safe k of the instances scope at every other tolerance of the table's ladder;
- the fitted law k = a + C ln n (class scope when it has one, else the instances scope, said which)
  beside the published constants C at the table's eps, or why there is no law;
- time: from the policy block when the table has one (a saving counts only at a policy k: usable and
  faster in enough trials), else the best median speed-up of the reduced pipeline over the original's
  baseline, or "no saving" when every measured k was slower end to end.

Pure functions of the table (and the timings frame of :mod:`calib.analysis.timing`); no HTML here.
"""

from __future__ import annotations

import json
from typing import TYPE_CHECKING, Optional

import pandas as pd

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, LawClass, SafeKTable

#: the time verdict of a point set: there is no solve to save, the timings hold the sketch cost alone
NO_SOLVE = "no solve to save (a point set): the timings show the sketch cost only"
#: said when no measured (cell, k) of a class ran faster than the original's baseline
NO_SAVING = "no saving: at every measured k the reduced pipeline was slower end to end than the original"


def _key(item: Entry | LawClass) -> tuple:
    return (item.family, json.dumps(item.class_params, sort_keys=True), item.projector, item.retrieval)


def _fraction(k: Optional[int], m: int) -> Optional[float]:
    return None if k is None else k / m


def size_line(entry: Entry) -> dict:
    """One size of a class: m, instances, both scopes' safe k with k / m, policy answer."""
    policy = entry.policy or None
    scope = entry.class_
    return {"size": entry.size, "m": entry.projected_dim, "n": entry.n_points, "instances": entry.instances,
            "class_safe_k": scope.safe_k, "class_fraction": _fraction(scope.safe_k, entry.projected_dim),
            "class_reason": scope.reason, "safe_k": entry.safe_k,
            "fraction": _fraction(entry.safe_k, entry.projected_dim), "reason": entry.safe_k_reason,
            "policy_k": None if policy is None else policy.k,
            "policy_answer": None if policy is None else policy.answer}


def law_line(law: LawClass) -> dict:
    """The class's law: the class-scope one when it exists, else the instances-scope one, with the bounds' C."""
    for scope, fitted in (("class", law.class_safe_k_law), ("instances", law.safe_k_law)):
        if fitted.C is not None:
            return {"scope": scope, "a": fitted.a, "C": fitted.C, "censored": fitted.censored,
                    "reason": "", "eps": law.theory.eps, "rules": law.theory.rules}
    fitted = law.safe_k_law
    return {"scope": None, "a": None, "C": None, "censored": fitted.censored,
            "reason": fitted.reason, "eps": law.theory.eps, "rules": law.theory.rules}


def policy_time_line(entries: list[Entry]) -> Optional[str]:
    """The time verdict from the policy blocks (a saving counts only where it is usable often enough),
    None when the table carries no policy block."""
    blocks = [(entry.size, entry.policy) for entry in entries if entry.policy]
    if not blocks:
        return None
    saving = [(size, block) for size, block in blocks if block.k is not None]
    if not saving:
        return "no saving: at no measured k was the answer both usable and faster often enough (no policy k)"
    size, block = max(saving, key=lambda item: item[1].speedup or 0.0)
    speedup = "" if block.speedup is None else f", {block.speedup:.3g}× faster than the baseline"
    return f"saves time: policy k = {block.k} at {size}{speedup} (usable and faster in enough trials)"


def time_line(timings: pd.DataFrame, key: tuple) -> str:
    """The best median speed-up of the class over its sizes and k, or :data:`NO_SAVING` (timings alone,
    without asking whether the answer at that k was usable: used when the table has no policy block)."""
    if timings is None or timings.empty:
        return "not measured"
    family, _, projector, retrieval = key
    mine = timings[timings["family"].eq(family) & timings["projector"].eq(projector) & timings["retrieval"].eq(retrieval)]
    speedups = pd.to_numeric(mine["speedup"], errors="coerce")
    if not speedups.notna().any():
        return "not measured"
    best = mine.loc[speedups.idxmax()]
    if float(best["speedup"]) <= 1.0:
        return NO_SAVING
    return (f"faster at some k, usability not weighed: best median speed-up {float(best['speedup']):.3g}× at "
            f"k = {int(best['k'])} ({best['size']})")


def class_answers(table: SafeKTable, analysis: Analysis, timings: Optional[pd.DataFrame], label) -> list[dict]:
    """One answer per class of ``analysis`` (module docstring); ``label(entry)`` names the class parameters."""
    laws = {_key(law): law for law in analysis.laws}
    ladder = [other for other in table.analyses if other is not analysis]
    classes: dict[tuple, list] = {}
    for entry in analysis.entries:
        classes.setdefault(_key(entry), []).append(entry)
    answers = []
    for key, entries in sorted(classes.items()):
        entries = sorted(entries, key=lambda entry: (entry.n_points, entry.size))
        first = entries[0]
        others = []
        for other in ladder:
            by_size = {entry.size: entry.safe_k for entry in other.entries if _key(entry) == key}
            others.append({"tau": other.tau, "safe_k": [by_size.get(entry.size) for entry in entries]})
        answers.append({"family": first.family, "label": label(first), "projector": first.projector,
                        "retrieval": first.retrieval, "kind": first.kind,
                        "sizes": [size_line(entry) for entry in entries], "ladder": others,
                        "law": law_line(laws[key]) if key in laws else None,
                        "time": NO_SOLVE if first.kind == "points" else (policy_time_line(entries) or time_line(timings, key))})
    return answers
