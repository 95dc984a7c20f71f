"""Answers from a safe-k table, in both directions.

``k_for``: which k for (family, n, projector) at a target 1 - delta?

- the safe k from the law k = a + C ln n fitted over the measured sizes, rounded up; the safe k of
  each size is recomputed from the stored counts when delta or the confidence differ from the
  table's (the same monotone Clopper–Pearson rule), so any target can be asked;
- the k where the logistic model reaches 1 - delta (a point estimate, no confidence claim).

``success_for``: at a given k, the model's expected success and the measured error quantiles.

The logistic model at n: k50(n) from the law fitted to the per-size k50, the slope interpolated
linearly in ln n between the measured sizes (held constant beyond them); success(k) =
expit(slope (ln k - ln k50(n))) and k(p) = k50(n) exp(logit(p) / slope), exact inverses of each
other. An n outside the measured sizes is an extrapolation and is flagged.

``n`` is the number of points the JL theory counts (for an LP with rows projected: columns + 1).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np
from scipy import special

from calib.analysis.law import fit_law
from calib.analysis.stats import clopper_pearson_lower
from calib.analysis.tables import Confidence, class_namer, safe_k_rule
from calib.errors import InputError


@dataclass(frozen=True)
class Query:
    """What is asked: the class (family, projector, retrieval, non-size params) and the size n."""

    family: str
    n: int
    projector: str
    retrieval: Optional[str] = None
    params: dict = field(default_factory=dict)
    tau: Optional[float] = None

    def __post_init__(self) -> None:
        if isinstance(self.n, bool) or not isinstance(self.n, (int, np.integer)) or self.n < 2:
            raise InputError("--n", f"must be an integer >= 2 (points the projection keeps), got {self.n!r}",
                             "for an LP with rows projected give its columns + 1")


def select_analysis(table: dict, tau: Optional[float]) -> tuple[dict, str]:
    """The analysis answering tolerance ``tau``: exact, else the nearest stricter one (noted)."""
    analyses = sorted(table["analyses"], key=lambda analysis: (analysis["tau"] is None, analysis["tau"] or 0.0))
    available = [analysis["tau"] for analysis in analyses if analysis["tau"] is not None]
    if tau is None:
        chosen = analyses[0]
        note = "" if len(analyses) == 1 else f"the table holds tau {available}; answering for the strictest, {chosen['tau']:g}"
        return chosen, note
    if not available:
        raise InputError("--tau", "the table's predicate has no tolerance", "omit --tau")
    stricter = [analysis for analysis in analyses if analysis["tau"] is not None and analysis["tau"] <= tau * (1 + 1e-12)]
    if not stricter:
        raise InputError("--tau", f"{tau:g} is stricter than every tolerance of the table ({', '.join(f'{t:g}' for t in available)})",
                         "rebuild the table with that tolerance: `calib tables STORE --tau ...`")
    chosen = stricter[-1]
    note = "" if math.isclose(chosen["tau"], tau) else \
        f"tau {tau:g} is not in the table; answering for the nearest stricter tolerance {chosen['tau']:g} (conservative)"
    return chosen, note


def _same(stored, given: str) -> bool:
    """Whether a stored parameter equals a KEY=VALUE text (numbers compared as numbers)."""
    try:
        given = json.loads(given)
    except (TypeError, ValueError):
        pass
    return stored == given


def class_entries(analysis: dict, query: Query) -> list[dict]:
    """Entries of the queried class across sizes, sorted by n; InputError when none or ambiguous."""
    def matches(entry: dict) -> bool:
        return (entry["family"] == query.family and entry["projector"] == query.projector
                and (query.retrieval is None or entry["retrieval"] == query.retrieval)
                and all(_same(entry["class_params"].get(key), value) for key, value in query.params.items()))

    found = [entry for entry in analysis["entries"] if matches(entry)]
    if not found:
        offered = sorted({f"{entry['family']} / {entry['projector']}" for entry in analysis["entries"]})
        raise InputError("lookup", f"no entries for family {query.family!r} with projector {query.projector!r}",
                         f"the table has: {'; '.join(offered)}")
    name = class_namer(found)
    classes = sorted({f"retrieval {entry['retrieval']} {name(entry['class_params'])}".strip() for entry in found})
    if len(classes) > 1:
        raise InputError("lookup", f"{len(classes)} classes match: {'; '.join(classes)}",
                         "narrow it with --retrieval and --param KEY=VALUE")
    return sorted(found, key=lambda entry: entry["n_points"])


def _safe_ks(entries: list[dict], confidence: Confidence) -> list[Optional[int]]:
    """Safe k of each size by the monotone Clopper–Pearson rule at ``confidence``, from the counts."""
    out = []
    for entry in entries:
        grid = entry["grid"]
        lower = clopper_pearson_lower([p["successes"] for p in grid], [p["trials"] for p in grid], confidence.level)
        out.append(safe_k_rule([p["k"] for p in grid], lower >= confidence.target)[0])
    return out


@dataclass(frozen=True)
class Transition:
    """The logistic model at one n, or the reason there is none (k50 None)."""

    k50: Optional[float] = None
    slope: Optional[float] = None
    reason: str = ""

    def success(self, k: float) -> float:
        return float(special.expit(self.slope * (math.log(k) - math.log(self.k50))))

    def k_at(self, rate: float) -> float:
        return float(self.k50 * math.exp(special.logit(rate) / self.slope))


def transition_at(entries: list[dict], n: int) -> Transition:
    """The logistic model of the class at ``n`` (see the module text)."""
    fitted = [entry for entry in entries if entry["transition"]["k50"] is not None]
    if not fitted:
        reasons = sorted({entry["transition"]["reason"] for entry in entries})
        return Transition(reason="no size has a logistic fit: " + "; ".join(reasons))
    sizes = [entry["n_points"] for entry in fitted]
    law = fit_law(sizes, [entry["transition"]["k50"] for entry in fitted])
    if law.ok:
        k50 = law.at(n)
    elif n in sizes:
        k50 = fitted[sizes.index(n)]["transition"]["k50"]
    else:
        return Transition(reason=f"one fitted size (n={sizes[0]}): no law to carry k50 to n={n}")
    if k50 <= 0:
        return Transition(reason=f"the k50 law gives {k50:.3g} <= 0 at n={n}")
    slope = float(np.interp(math.log(n), np.log(sizes), [entry["transition"]["slope"] for entry in fitted]))
    return Transition(k50, slope)


def _measured_range(entries: list[dict], n: int) -> dict:
    sizes = [entry["n_points"] for entry in entries]
    return {"measured_n": sizes, "extrapolated": not (min(sizes) <= n <= max(sizes))}


def k_for(table: dict, query: Query, confidence: Optional[Confidence] = None) -> dict:
    """The k for ``query`` at ``confidence`` (default: the table's target), with how it was found."""
    target = table["target"]
    confidence = confidence or Confidence(target["delta"], target["confidence"])
    analysis, note = select_analysis(table, query.tau)
    entries = class_entries(analysis, query)
    sizes = [entry["n_points"] for entry in entries]
    safe = _safe_ks(entries, confidence)
    law = fit_law(sizes, safe)
    answer = {"family": query.family, "n": query.n, "projector": query.projector, "retrieval": entries[0]["retrieval"],
              "tau": analysis["tau"], "predicate": analysis["predicate"]["name"], "delta": confidence.delta,
              "confidence": confidence.level, "note": note, **_measured_range(entries, query.n),
              "measured_safe_k": safe, "law": {"a": law.a, "C": law.C, "reason": law.reason}}
    if law.ok:
        value = law.at(query.n)
        answer |= {"safe_k": max(1, math.ceil(value - 1e-9)), "safe_k_law_value": value, "method": "law k = a + C ln n"}
    elif query.n in sizes and safe[sizes.index(query.n)] is not None:
        answer |= {"safe_k": safe[sizes.index(query.n)], "safe_k_law_value": None, "method": "measured at this n (no law)"}
    else:
        reasons = sorted({reason for entry in entries for reason in [entry["safe_k_reason"]] if reason})
        answer |= {"safe_k": None, "safe_k_law_value": None,
                   "method": f"none: {law.reason}" + (f" ({'; '.join(reasons)})" if reasons else "")}
    model = transition_at(entries, query.n)
    answer |= {"k_model": model.k_at(confidence.target) if model.k50 else None, "model_reason": model.reason}
    return answer | policy_at(entries, query.n)


def policy_at(entries: list[dict], n: int) -> dict:
    """``{"policy": ...}``: the policy answer measured at the size nearest to n (on ln n), when the table has it.

    The policy k rests on measured times at one size; it is not extrapolated across sizes.
    """
    nearest = min(entries, key=lambda entry: abs(math.log(entry["n_points"]) - math.log(n)))
    block = nearest.get("policy")
    if block is None:
        return {}
    return {"policy": {"from_size": nearest["size"], "n": nearest["n_points"], "k": block["k"], "answer": block["answer"],
                       "time_median_s": block["time_median_s"], "baseline_median_s": block["baseline_median_s"],
                       "speedup": block["speedup"]}}


def _interpolate_error(entry: dict, k: float) -> dict:
    points = [p for p in entry["grid"] if p["error_median"] is not None]
    if entry["error_metric"] is None or not points:
        return {"metric": entry["error_metric"], "median": None, "q90": None, "from_size": entry["size"]}
    x = np.log([p["k"] for p in points])
    logk = math.log(k)
    return {"metric": entry["error_metric"], "from_size": entry["size"],
            "median": float(np.interp(logk, x, [p["error_median"] for p in points])),
            "q90": float(np.interp(logk, x, [p["error_q90"] for p in points])),
            "k_outside_grid": not (x[0] <= logk <= x[-1])}


def success_for(table: dict, query: Query, k: int) -> dict:
    """Expected success at ``k`` (logistic model) and the measured error there (nearest size)."""
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise InputError("--k", f"must be a positive integer, got {k!r}", "e.g. --k 64")
    analysis, note = select_analysis(table, query.tau)
    entries = class_entries(analysis, query)
    model = transition_at(entries, query.n)
    nearest = min(entries, key=lambda entry: abs(math.log(entry["n_points"]) - math.log(query.n)))
    measured = min(nearest["grid"], key=lambda point: abs(math.log(point["k"]) - math.log(k)))
    return {"family": query.family, "n": query.n, "projector": query.projector, "retrieval": entries[0]["retrieval"],
            "tau": analysis["tau"], "predicate": analysis["predicate"]["name"], "k": int(k), "note": note,
            **_measured_range(entries, query.n),
            "success": model.success(k) if model.k50 else None, "model_reason": model.reason,
            "nearest_measured": {"size": nearest["size"], "n": nearest["n_points"], "k": measured["k"],
                                 "rate": measured["rate"], "lower_bound": measured["lower_bound"],
                                 "trials": measured["trials"]},
            "error": _interpolate_error(nearest, k)} | _policy_point(nearest, k)


def _policy_point(entry: dict, k: int) -> dict:
    """``{"policy_at_k": ...}``: usable-and-faster trials at the measured k nearest to ``k``, when the table has them."""
    block = entry.get("policy")
    if block is None:
        return {}
    point = min(block["grid"], key=lambda p: abs(math.log(p["k"]) - math.log(k)))
    return {"policy_at_k": {"size": entry["size"], **point, "policy_k": block["k"], "answer": block["answer"]}}
