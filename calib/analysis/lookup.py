"""Answers from a safe-k table, in both directions, in the user's terms and within bounds.

``k_for``: which k for (family, size, projector) at a target 1 - delta?

- the size is given in the family's own terms (its size keys, an MPS file, a saved instance: see
  :func:`size_of`), from which the family's own rules give n (the JL point count) and the projected
  dimension m; ``n`` alone (and ``m``) remain for experts;
- the scope: the class answer by default (the class safe k of each size, :mod:`calib.verdicts.scope`),
  or the answer for the instances measured (``scope="instances"``); each size's safe k is recomputed
  from the stored counts when delta or the confidence differ from the table's (the same rules);
- a size that was measured is answered with its measured safe k; another size with the law
  k = a + C ln n fitted over the uncensored sizes (:func:`calib.analysis.law.censored_law`),
  rounded up; never below 1 and never above m: a value above m is answered "no reduction meets
  the target at this size", a value below 1 is raised to 1 with a flag;
- an n outside the measured sizes is an extrapolation, flagged with how far (x the largest, or
  the smallest, measured n);
- the k where the logistic model reaches 1 - delta (a point estimate, no confidence claim), also
  capped at m.

``success_for``: at a given k, the model's expected success and the measured error quantiles.

The logistic model at n: k50(n) from the law fitted to the per-size k50, the slope interpolated
linearly in ln n between the measured sizes (held constant beyond them); success(k) =
expit(slope (ln k - ln k50(n))) and k(p) = k50(n) exp(logit(p) / slope), exact inverses of each
other.

The table is read as its typed records (:class:`calib.analysis.records.SafeKTable`, built from the
read file by the caller: `calib lookup`, :func:`calib.atlas.safe_k`); the answer is a plain dict,
what ``calib lookup --json`` prints.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Optional

import numpy as np

from calib.analysis.classnames import class_namer
from calib.analysis.extrapolation import largest_held_out
from calib.analysis.law import censored_law, fit_law
from calib.analysis.modelfit import resolved_size
from calib.checks import is_integer
from calib.errors import InputError
from calib.keys import canonical_json
from calib.verdicts.saferule import Confidence, censoring, safe_k_rule

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, SafeKTable

SCOPES = ("class", "instances")


@dataclass(frozen=True)
class Query:
    """What is asked: the class (family, projector, retrieval, non-size params), the size (n, and the
    projected dimension m when known) and the scope of the answer."""

    family: str
    n: int
    projector: Optional[str] = None
    retrieval: Optional[str] = None
    params: dict = field(default_factory=dict)
    tau: Optional[float] = None
    m: Optional[int] = None
    scope: str = "class"
    size: str = ""

    def __post_init__(self) -> None:
        if not is_integer(self.n) or self.n < 2:
            raise InputError("--n", f"must be an integer >= 2 (points the projection keeps), got {self.n!r}",
                             "for an LP with rows projected give its columns + 1")
        if self.m is not None and (not is_integer(self.m) or self.m < 1):
            raise InputError("--m", f"must be a positive integer (the projected dimension), got {self.m!r}",
                             "for an LP with rows projected give its rows")
        if self.scope not in SCOPES:
            raise InputError("--scope", f"unknown scope {self.scope!r}", f"choose one of {', '.join(SCOPES)}")


def size_of(family_name: str, size: dict, params: Optional[dict] = None) -> tuple[int, int, str]:
    """(n, m, size label) of a size given in the family's own keys, by the family's own rules.

    >>> size_of("lp-planted", {"rows": "2000", "cols": "4000"})
    (4001, 2000, 'rows=2000,cols=4000')
    """
    family, full = resolved_size(family_name, size, params)
    return int(family.n_points(full)), int(family.projected_dim(full)), family.size_label(full)


def size_of_mps(path) -> tuple[int, int, str]:
    """(n, m, label) of an LP in an MPS file: its standard form's columns + 1 and rows (row projection)."""
    from pathlib import Path

    # here, not at import: reading a model needs scipy.sparse and HiGHS, which a lookup by size never loads
    from calib.problems.mps import read_mps_standard

    path = Path(path)
    if not path.is_file():
        raise InputError(str(path), "no such MPS file", "give the path of an .mps or .mps.gz file")
    lp = read_mps_standard(path)
    return lp.jl_points, int(lp.n_rows), path.name


def size_of_instance(path) -> tuple[str, int, int, str, dict]:
    """(family, n, m, size label, class params) of an instance saved by calib (its manifest)."""
    from calib.families import get
    from calib.instance_io import read_manifest

    manifest = read_manifest(path)
    family = get(manifest["family"], str(path))
    params = family.resolve(manifest["params"], str(path))
    keys = set(family.size_keys)
    return (family.name, int(family.n_points(params)), int(family.projected_dim(params)), family.size_label(params),
            {key: value for key, value in params.items() if key not in keys})


def select_analysis(table: "SafeKTable", tau: Optional[float]) -> tuple["Analysis", str]:
    """The analysis answering tolerance ``tau``: exact, else the nearest stricter one (noted)."""
    analyses = sorted(table.analyses, key=lambda analysis: (analysis.tau is None, analysis.tau or 0.0))
    available = [analysis.tau for analysis in analyses if analysis.tau is not None]
    if tau is None:
        chosen = analyses[0]
        note = "" if len(analyses) == 1 else f"the table holds tau {available}; answering for the strictest, {chosen.tau:g}"
        return chosen, note
    if not available:
        raise InputError("--tau", "the table's predicate has no tolerance", "omit --tau")
    stricter = [analysis for analysis in analyses if analysis.tau is not None and analysis.tau <= tau * (1 + 1e-12)]
    if not stricter:
        raise InputError("--tau", f"{tau:g} is stricter than every tolerance of the table ({', '.join(f'{t:g}' for t in available)})",
                         "rebuild the table with that tolerance: `calib tables STORE --tau ...`")
    chosen = stricter[-1]
    note = "" if math.isclose(chosen.tau, tau) else \
        f"tau {tau:g} is not in the table; answering for the nearest stricter tolerance {chosen.tau:g} (conservative)"
    return chosen, note


def _same(stored, given: str) -> bool:
    """Whether a stored parameter equals a KEY=VALUE text (numbers compared as numbers)."""
    try:
        given = json.loads(given)
    except (TypeError, ValueError):
        pass
    return stored == given


def class_projectors(analysis: "Analysis", query: Query) -> list[str]:
    """The projectors the table holds for the queried family (and class parameters), sorted."""
    return sorted({entry.projector for entry in analysis.entries if entry.family == query.family
                   and (query.retrieval is None or entry.retrieval == query.retrieval)
                   and all(_same(entry.class_params.get(key), value) for key, value in query.params.items())})


def class_entries(analysis: "Analysis", query: Query) -> list["Entry"]:
    """Entries of the queried class across sizes, sorted by n; InputError when none or ambiguous."""
    def matches(entry: "Entry") -> bool:
        return (entry.family == query.family and entry.projector == query.projector
                and (query.retrieval is None or entry.retrieval == query.retrieval)
                and all(_same(entry.class_params.get(key), value) for key, value in query.params.items()))

    found = [entry for entry in analysis.entries if matches(entry)]
    if not found:
        offered = sorted({f"{entry.family} / {entry.projector}" for entry in analysis.entries})
        raise InputError("lookup", f"no entries for family {query.family!r} with projector {query.projector!r}",
                         f"the table has: {'; '.join(offered)}")
    name = class_namer([entry.class_params for entry in found])
    classes = sorted({f"retrieval {entry.retrieval} {name(entry.class_params)}".strip() for entry in found})
    if len(classes) > 1:
        raise InputError("lookup", f"{len(classes)} classes match: {'; '.join(classes)}",
                         "narrow it with --retrieval and --param KEY=VALUE")
    return sorted(found, key=lambda entry: entry.n_points)


def _lower_bounds(entry: "Entry", confidence: Confidence, scope: str) -> np.ndarray:
    """Per-k lower bounds of one entry in ``scope`` at ``confidence``, recomputed from its counts."""
    from calib.verdicts.scope import Anova, class_lower_bound, design_rho
    from calib.verdicts.stats import clopper_pearson_lower

    grid = entry.grid
    successes, trials = [p.successes for p in grid], [p.trials for p in grid]
    if scope == "instances":
        return clopper_pearson_lower(successes, trials, confidence.level)
    anova = entry.class_.anova
    fields = Anova(anova["ss_between"], anova["ss_within"], int(anova["df_between"]), int(anova["df_within"]),
                   anova["n0"], int(anova["instances"]))
    sizes = [p.cluster_size for p in grid]
    return class_lower_bound(successes, trials, sizes, design_rho(fields, sizes, confidence.level), confidence.level)


def _stored_safe_k(entry: "Entry", scope: str) -> tuple[Optional[int], str]:
    """(safe k, reason) of one entry in ``scope`` as the table states it (at the table's target)."""
    if scope == "instances":
        return entry.safe_k, entry.safe_k_reason
    return entry.class_.safe_k, entry.class_.reason


def safe_ks(entries: list["Entry"], confidence: Confidence, scope: str = "class",
            stated: Optional[Confidence] = None) -> list[tuple[Optional[int], str]]:
    """(safe k, reason) of each size in ``scope`` by the monotone rule at ``confidence``.

    Read from the entries when ``confidence`` is the table's own (``stated``), else recomputed from
    the stored counts (the only path that needs the beta and F quantiles of ``scipy.special``).
    """
    if stated is not None and confidence == stated:
        return [_stored_safe_k(entry, scope) for entry in entries]
    out = []
    for entry in entries:
        lower = _lower_bounds(entry, confidence, scope)
        safe, reason = safe_k_rule([p.k for p in entry.grid], lower >= confidence.target)
        if scope == "class" and safe is None:
            from calib.verdicts.scope import class_reason

            pooled = _lower_bounds(entry, confidence, "instances")
            mine, mine_reason = safe_k_rule([p.k for p in entry.grid], pooled >= confidence.target)
            reason = class_reason(safe, reason, entry.instances, confidence.target, confidence.level,
                                  mine_reason if mine is None else None)
        out.append((safe, reason))
    return out


def _expit(x: float) -> float:
    """The logistic function 1 / (1 + e^-x), without overflow for large |x|.

    >>> _expit(0.0), round(_expit(math.log(9.0)), 12), _expit(-1000.0)
    (0.5, 0.9, 0.0)
    """
    if x >= 0:
        return 1.0 / (1.0 + math.exp(-x))
    z = math.exp(x)
    return z / (1.0 + z)


def _logit(p: float) -> float:
    """ln(p / (1 - p)), the inverse of :func:`_expit`.

    >>> round(_logit(0.9), 12) == round(math.log(9.0), 12)
    True
    """
    return math.log(p / (1.0 - p))


@dataclass(frozen=True)
class Transition:
    """The logistic model at one n, or the reason there is none (k50 None)."""

    k50: Optional[float] = None
    slope: Optional[float] = None
    reason: str = ""

    def success(self, k: float) -> float:
        return _expit(self.slope * (math.log(k) - math.log(self.k50)))

    def k_at(self, rate: float) -> float:
        return float(self.k50 * math.exp(_logit(rate) / self.slope))


def transition_at(entries: list["Entry"], n: int) -> Transition:
    """The logistic model of the class at ``n`` (see the module text)."""
    fitted = [entry for entry in entries if entry.transition.k50 is not None]
    if not fitted:
        reasons = sorted({entry.transition.reason for entry in entries})
        return Transition(reason="no size has a logistic fit: " + "; ".join(reasons))
    sizes = [entry.n_points for entry in fitted]
    law = fit_law(sizes, [entry.transition.k50 for entry in fitted])
    if law.ok:
        k50 = law.at(n)
    elif n in sizes:
        k50 = fitted[sizes.index(n)].transition.k50
    else:
        return Transition(reason=f"one fitted size (n={sizes[0]}): no law to carry k50 to n={n}")
    if k50 <= 0:
        return Transition(reason=f"the k50 law gives {k50:.3g} <= 0 at n={n}")
    slope = float(np.interp(math.log(n), np.log(sizes), [entry.transition.slope for entry in fitted]))
    return Transition(k50, slope)


def _measured_range(entries: list["Entry"], n: int) -> dict:
    """The measured n, whether ``n`` lies outside them, and how far (x the largest / smallest measured n)."""
    sizes = [entry.n_points for entry in entries]
    low, high = min(sizes), max(sizes)
    factor = n / high if n > high else (low / n if n < low else None)
    side = "largest" if n > high else "smallest"
    return {"measured_n": sizes, "extrapolated": factor is not None,
            "extrapolation": "" if factor is None else f"n = {n} is {factor:.3g} x the {side} measured n ({high if n > high else low})"}


NO_REDUCTION = "no reduction meets the target at this size"


def bounded(value: float, m: Optional[int]) -> tuple[Optional[int], str]:
    """A law's value as an answer: rounded up, at least 1, never above m (module text).

    >>> bounded(12.2, 40), bounded(-3.0, 40), bounded(47.0, 40)
    ((13, ''), (1, 'the law gives -3 < 1: raised to 1'), (None, 'no reduction meets the target at this size (the law gives 47 > m = 40)'))
    """
    k = math.ceil(value - 1e-9)
    if m is not None and k > m:
        return None, f"{NO_REDUCTION} (the law gives {value:.3g} > m = {m})"
    if k < 1:
        return 1, f"the law gives {value:.3g} < 1: raised to 1"
    return k, ""


def _measured(entries: list["Entry"], query: Query) -> Optional[int]:
    """Index of the measured size the query names (same n, and same m when known), else None."""
    for index, entry in enumerate(entries):
        if entry.n_points == query.n and (query.m is None or entry.projected_dim == query.m):
            return index
    return None


def decision_caveat(analysis: "Analysis", entry: "Entry") -> str:
    """A note when an LP's answer comes from a predicate that never looks at the retrieved point
    (``bound``, ``classify``): the user's decision, completed (retrieval ``completion``), can be usable
    at a smaller k than the projected optimum is close (docs/decision.md); "" otherwise.

    >>> from types import SimpleNamespace as record
    >>> decision_caveat(record(predicate=record(name="bound")), record(kind="lp"))[:40]
    'this table judges the projected optimum '
    >>> decision_caveat(record(predicate=record(name="usable")), record(kind="lp"))
    ''
    """
    if entry.kind != "lp" or analysis.predicate.name.split("+")[0] not in ("bound", "classify"):
        return ""
    return ("this table judges the projected optimum (preset bound), not the decision a user takes from it: completed "
            "(retrieval completion) the decision can be usable at a smaller k (docs/decision.md); measure your model "
            "with `calib probe MODEL --retrieval completion --find-k`")


def k_for(table: "SafeKTable", query: Query, confidence: Optional[Confidence] = None) -> dict:
    """The k for ``query`` at ``confidence`` (default: the table's target), with how it was found."""
    stated = Confidence(table.target.delta, table.target.confidence)
    confidence = confidence or stated
    analysis, note = select_analysis(table, query.tau)
    entries = class_entries(analysis, query)
    note = "; ".join(filter(None, [note, decision_caveat(analysis, entries[0])]))
    sizes = [entry.n_points for entry in entries]
    answers = safe_ks(entries, confidence, query.scope, stated)
    censored = [censoring(k, reason, entry.projected_dim) for (k, reason), entry in zip(answers, entries)]
    law = censored_law(sizes, [k for k, _ in answers], censored)
    range_fields = _measured_range(entries, query.n)
    held = largest_held_out(sizes, [k for k, _ in answers], censored)
    if range_fields["extrapolated"] and held is not None:  # how far one step of extrapolation was off here
        range_fields["extrapolation"] += (f"; on this class the law of the smaller sizes gave k = {held[0]:.0f} at its "
                                          f"largest measured size, where {held[1]} was measured (x{held[2]:.3g})")
    answer = {"family": query.family, "n": query.n, "m": query.m, "size": query.size, "scope": query.scope,
              "projector": query.projector, "retrieval": entries[0].retrieval, "kind": entries[0].kind,
              "tau": analysis.tau, "predicate": analysis.predicate.name, "delta": confidence.delta,
              "confidence": confidence.level, "note": note, **range_fields,
              "instances": [entry.instances for entry in entries],
              "measured_safe_k": [k for k, _ in answers], "censored": censored,
              "law": {"a": law.a, "C": law.C, "reason": law.reason}, "flag": ""}
    if query.m is None:
        answer["flag"] = "projected dimension unknown (give --size, --mps or --m): the answer is not capped at m"
    measured = _measured(entries, query)
    if measured is not None:
        k, reason = answers[measured]
        answer |= {"safe_k": k, "safe_k_law_value": None,
                   "method": "measured at this size" + (f": none ({reason})" if k is None else "")}
    elif law.ok:
        value = law.at(query.n)
        k, flag = bounded(value, query.m)
        answer |= {"safe_k": k, "safe_k_law_value": value, "method": "law k = a + C ln n over the uncensored sizes"}
        answer["flag"] = "; ".join(filter(None, [flag, answer["flag"]]))
    else:
        reasons = sorted({reason for _, reason in answers if reason})
        answer |= {"safe_k": None, "safe_k_law_value": None,
                   "method": f"none: {law.reason}" + (f" ({'; '.join(reasons)})" if reasons else "")}
    if answer["safe_k"] is not None and query.m is not None and answer["safe_k"] >= query.m:
        answer["flag"] = "; ".join(filter(None, [f"k = m = {query.m}: {NO_REDUCTION}", answer["flag"]]))
    if answer["safe_k"] is None and not answer["flag"]:
        answer["flag"] = none_flag(answers, law, None if measured is None else answers[measured][1])
    model = transition_at(entries, query.n)
    k_model = model.k_at(confidence.target) if model.k50 else None
    model_reason = model.reason
    if k_model is not None and query.m is not None and k_model > query.m:
        k_model, model_reason = None, f"{NO_REDUCTION} (the model reaches the target at k = {model.k_at(confidence.target):.3g} > m = {query.m})"
    answer |= {"k_model": k_model, "model_reason": model_reason}
    return answer | policy_at(entries, query.n)


def none_flag(answers: list[tuple[Optional[int], str]], law, measured_reason: Optional[str] = None) -> str:
    """Why the answer is none, in words a caller can branch on (never empty): no tested k reached the
    target at this measured size or at any measured size, or no law carries the measured sizes to this one.

    >>> none_flag([(None, "no swept k reaches the target")], None)
    'no reduction meets the target: no tested k reaches it at any measured size (no swept k reaches the target)'
    """
    if measured_reason is not None and any(k is not None for k, _ in answers):
        return f"{NO_REDUCTION}: no tested k reaches it here" + (f" ({measured_reason})" if measured_reason else "")
    if all(k is None for k, _ in answers):
        reasons = sorted({reason for _, reason in answers if reason})
        return ("no reduction meets the target: no tested k reaches it at any measured size"
                + (f" ({'; '.join(reasons)})" if reasons else ""))
    return f"no answer at this size: {law.reason}" if law is not None and law.reason else "no answer at this size"


def answer(table: "SafeKTable", query: Query, k: Optional[int] = None, delta: Optional[float] = None,
           confidence: Optional[float] = None, timings: Optional[list] = None, model: Optional[dict] = None,
           force: bool = False, check: bool = True) -> dict:
    """The answer of ``calib lookup``: :func:`success_for` at ``k`` when given, else :func:`k_for` at the
    target 1 - ``delta`` and ``confidence`` (each defaulting to the table's), with the expected speed-up
    from ``timings`` (rows of the table's timings file, :func:`speedup_at`). Without a projector in the
    query, the best projector of the table answers (:func:`best_projector`). A k answer carries the fit
    check of the user's ``model`` (:mod:`calib.analysis.modelfit`): withheld outside the measured
    structure unless ``force``."""
    if check:
        found = answer(table, query, k, delta, confidence, timings, check=False)
        if "safe_k" not in found:
            return found
        from dataclasses import replace

        from calib.analysis.modelfit import checked

        analysis, _ = select_analysis(table, query.tau)
        entries = class_entries(analysis, replace(query, projector=found["projector"]))
        return checked(found, entries, model, force, table)
    if query.projector is None:
        return best_projector(table, query, k, delta, confidence, timings)
    if k is not None:
        return success_for(table, query, k)
    target = table.target
    found = k_for(table, query, Confidence(delta if delta is not None else target.delta,
                                           confidence if confidence is not None else target.confidence))
    found["speedup"] = speedup_at(found, table, query, timings)
    found["projector_named"] = True
    found["answer"] = headline(found)
    return found


def _rank(found: dict) -> tuple:
    """Order of answers when choosing a projector: a safe k below m first, the smallest k, then the
    largest measured speed-up, then the name."""
    k = found.get("safe_k")
    usable = k is not None and (found["m"] is None or k < found["m"])
    speed = (found.get("speedup") or {}).get("speedup") or 0.0
    return (not usable, k if k is not None else math.inf, -speed, found["projector"])


def best_projector(table: "SafeKTable", query: Query, k: Optional[int], delta: Optional[float], confidence: Optional[float],
                   timings: Optional[list]) -> dict:
    """The answer for the projector with the smallest safe k among those the table holds for the class
    (ties: the larger measured speed-up, then the name), with every other projector's safe k beside it."""
    from dataclasses import replace

    analysis, _ = select_analysis(table, query.tau)
    names = class_projectors(analysis, query)
    if not names:
        class_entries(analysis, query)  # raises the "no entries" error with what the table offers
    found = {name: answer(table, replace(query, projector=name), None, delta, confidence, timings, check=False)
             for name in names}
    best = min(found.values(), key=_rank)
    if k is not None:
        best = answer(table, replace(query, projector=best["projector"]), k, delta, confidence, timings, check=False)
    best = dict(best, projector_named=False,
                other_projectors={name: other.get("safe_k") for name, other in found.items()
                                  if name != best["projector"]})
    if "safe_k" in best:
        best["answer"] = headline(best)
    return best


def read_timings(path) -> list[dict]:
    """Rows of a timings file (``calib tables --timings``), [] when there is none (no pandas: lookup stays light)."""
    import csv
    from pathlib import Path

    path = Path(path)
    if not path.is_file():
        return []
    with path.open(newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def timings_beside(table_path) -> Optional[object]:
    """The timings file written beside a table: ``safe_k.json`` -> ``timings.csv``,
    ``safe_k-points.json`` -> ``timings-points.csv`` (the names `make demo` and `make atlas` use).

    >>> str(timings_beside("results/atlas/safe_k-points.json"))
    'results/atlas/timings-points.csv'
    """
    from pathlib import Path

    path = Path(table_path)
    if not path.name.startswith("safe_k"):
        return None
    return path.with_name("timings" + path.stem[len("safe_k"):] + ".csv")


def speedup_at(found: dict, table: "SafeKTable", query: Query, timings: Optional[list]) -> Optional[dict]:
    """The measured speed-up at the answered k (the original's fastest solve over sketch + projected
    solve + retrieval, medians, from the timings file): at the queried size when it was measured
    there, else at the measured size nearest in n at that size's own answered k (a measurement, not
    an extrapolation: said so). None without timings, for point sets (no solve to save) or no k."""
    if not timings or found.get("safe_k") is None:
        return None
    analysis, _ = select_analysis(table, query.tau)
    entries = class_entries(analysis, query)
    if entries[0].kind == "points":
        return None
    measured = _measured(entries, query)
    if measured is not None:
        entry, k, where = entries[measured], found["safe_k"], "at this size"
    else:
        entry = min(entries, key=lambda item: abs(math.log(item.n_points) - math.log(query.n)))
        index = entries.index(entry)
        k = found["measured_safe_k"][index]
        where = f"measured at {entry.size} (k = {k}), the nearest measured size; not extrapolated"
        if k is None:
            return None
    params = canonical_json(entry.params)
    for row in timings:
        if (row.get("family"), row.get("params"), row.get("projector"), row.get("retrieval")) == \
                (entry.family, params, entry.projector, entry.retrieval) and str(row.get("k")) == str(k):
            values = {name: _number(row.get(name)) for name in ("speedup", "baseline_median_s", "reduced_median_s")}
            if values["speedup"] is None:
                return None
            return {"size": entry.size, "k": k, "where": where, **values}
    return None


def _number(text) -> Optional[float]:
    try:
        value = float(text)
    except (TypeError, ValueError):
        return None
    return value if math.isfinite(value) else None


def headline(found: dict) -> str:
    """The answer in one short line: the k with k/m and the expected speed-up, or "don't sketch" and why
    (the details, e.g. where the speed-up was measured, are in the answer's other fields).

    >>> headline({"m": 600, "safe_k": 60, "projector": "gaussian", "speedup": {"speedup": 13.2, "where": "at this size"}})
    'safe k = 60 (k/m = 0.1) with gaussian: expected 13.2x faster end to end'
    >>> headline({"m": 90, "safe_k": 90, "projector": "gaussian"})
    "don't sketch: safe k = m = 90 with gaussian, no reduction meets the target"
    """
    m, k = found["m"], found["safe_k"]
    if k is None:
        who = found["projector"] if found.get("projector_named", True) else "any of the table's projectors"
        return f"don't sketch with {who}: no reduction meets the target"
    if m is not None and k >= m:
        return f"don't sketch: safe k = m = {m} with {found['projector']}, no reduction meets the target"
    share = f" (k/m = {k / m:.2g})" if m else ""
    speed = found.get("speedup")
    if speed is None:
        time = "no solve to save" if found.get("kind") == "points" else "speed-up not measured"
    elif speed["speedup"] > 1:
        time = f"expected {speed['speedup']:.3g}x faster end to end"
    else:
        time = f"slower end to end ({speed['speedup']:.2g}x): the sketch saves no time"
    return f"safe k = {k}{share} with {found['projector']}: {time}"


def policy_at(entries: list["Entry"], n: int) -> dict:
    """``{"policy": ...}``: the policy answer measured at the size nearest to n (on ln n), when the table has it.

    The policy k rests on measured times at one size; it is not extrapolated across sizes.
    """
    nearest = min(entries, key=lambda entry: abs(math.log(entry.n_points) - math.log(n)))
    block = nearest.policy
    if not block:
        return {}
    return {"policy": {"from_size": nearest.size, "n": nearest.n_points, "k": block.k, "answer": block.answer,
                       "time_median_s": block.time_median_s, "baseline_median_s": block.baseline_median_s,
                       "speedup": block.speedup}}


def _interpolate_error(entry: "Entry", k: float) -> dict:
    points = [p for p in entry.grid if p.error_median is not None]
    if entry.error_metric is None or not points:
        return {"metric": entry.error_metric, "median": None, "q90": None, "from_size": entry.size}
    x = np.log([p.k for p in points])
    logk = math.log(k)
    return {"metric": entry.error_metric, "from_size": entry.size,
            "median": float(np.interp(logk, x, [p.error_median for p in points])),
            "q90": float(np.interp(logk, x, [p.error_q90 for p in points])),
            "k_outside_grid": not (x[0] <= logk <= x[-1])}


def success_for(table: "SafeKTable", query: Query, k: int) -> dict:
    """Expected success at ``k`` (logistic model) and the measured error there (nearest size)."""
    if not is_integer(k) or k < 1:
        raise InputError("--k", f"must be a positive integer, got {k!r}", "e.g. --k 64")
    analysis, note = select_analysis(table, query.tau)
    entries = class_entries(analysis, query)
    model = transition_at(entries, query.n)
    nearest = min(entries, key=lambda entry: abs(math.log(entry.n_points) - math.log(query.n)))
    measured = min(nearest.grid, key=lambda point: abs(math.log(point.k) - math.log(k)))
    return {"family": query.family, "n": query.n, "projector": query.projector, "retrieval": entries[0].retrieval,
            "tau": analysis.tau, "predicate": analysis.predicate.name, "k": int(k), "note": note,
            **_measured_range(entries, query.n),
            "success": model.success(k) if model.k50 else None, "model_reason": model.reason,
            "nearest_measured": {"size": nearest.size, "n": nearest.n_points, "k": measured.k,
                                 "rate": measured.rate, "lower_bound": measured.lower_bound,
                                 "trials": measured.trials},
            "error": _interpolate_error(nearest, k)} | _policy_point(nearest, k)


def _policy_point(entry: "Entry", k: int) -> dict:
    """``{"policy_at_k": ...}``: usable-and-faster trials at the measured k nearest to ``k``, when the table has them."""
    block = entry.policy
    if not block:
        return {}
    point = min(block.grid, key=lambda p: abs(math.log(p.k) - math.log(k)))
    return {"policy_at_k": {"size": entry.size, **point.to_dict(), "policy_k": block.k, "answer": block.answer}}
