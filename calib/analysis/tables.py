"""Safe-k tables: the JSON of per-(family, size, projector, retrieval) safe k, both scopes, and laws.

Data flow: :func:`calib.analysis.rows.load_rows` reads the store (the edge), :func:`build_analysis`
is a pure function of that frame, :func:`write_table` writes the files (the other edge). The
statistics of a cell come from :func:`calib.analysis.cells.cell_stats`; this module assembles their
JSON (:func:`cell_entry` is the one place a cell's JSON is put together).

Per cell and swept k: trials, successes, instances, solver errors (apart), the success rate, the
one-sided Clopper–Pearson and Wilson lower bounds of the pooled count (scope: these instances),
the class lower bound of :mod:`calib.verdicts.scope` (scope: the class), and the median and 90th
percentile of the error metric. Per cell:

- the safe k of each scope: the smallest swept k whose bound reaches 1 - delta while every larger
  swept k does too (a monotone rule); null with the reason when there is none (for the class: the
  design's limit, e.g. "3 instances cannot certify 90% ...");
- the transition from a logistic fit of success on ln k with the cluster-robust covariance over
  instances: k50 and the k where the fitted rate is 1 - delta, each with its interval;
- the published bounds at the eps of :mod:`calib.analysis.bounds` and at the table's failure
  probability delta, with their ratio to each safe k.

Per class (family with its non-size parameters, projector, retrieval) across sizes: the laws
k = a + C ln n of the safe k of each scope and of k50 (:mod:`calib.analysis.law`), fitted on the
uncensored sizes only (no safe k, a safe k equal to the projected dimension, or every swept k
passing are censored: shown, never fitted), beside the constants of the published bounds.

Solver errors: a projected solve that ends in a solver error is its own outcome (counted per k,
left out of the rates unless ``solver_errors="fail"``); a time limit is a failure.

A table holds one analysis per tolerance of a ladder (``taus``), all at one confidence target.
Timings are not part of the table (they differ between two runs of one campaign, the table must
not): see :mod:`calib.analysis.timing`. The one exception is asked for explicitly: the policy
answer (:mod:`calib.analysis.policy`, ``policy=True`` or a predicate requiring time saved) rests
on measured times, and a table carrying it can differ between runs. These are empirical
statements, not proofs.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Optional

import numpy as np
import pandas as pd

from calib import SCHEMA_VERSION, __version__
from calib.analysis import bounds, policy as policy_answer
from calib.analysis.cells import CellStats, cell_stats
from calib.analysis.classnames import class_namer
from calib.analysis.classrule import folder_rules, fraction_rule
from calib.analysis.law import Law, censored_law
from calib.analysis.logistic import LogisticFit
from calib.analysis.rows import load_rows
from calib.analysis.tablefile import FORMAT, VERSION, dumps, seal
from calib.errors import InputError
from calib.features import NUMERIC, median_features
from calib.store.database import Store
from calib.verdicts.saferule import Confidence, censoring
from calib.verdicts.scope import instances_needed
from calib.verdicts.success import OPTIMIZATION_KINDS, Predicate, evaluate, metric_error, primary_tau, with_tau

if TYPE_CHECKING:
    from calib.analysis.records import Analysis

CELL_KEYS = ["family", "size", "params", "projector", "retrieval"]
CLASS_KEYS = ["family", "class_params", "projector", "retrieval"]
NOTICE = ("Safe-k tables are empirical evidence on the instances measured, not a proof: check a reduction "
          "policy on your own instances (`calib probe`) before relying on it in production.")
_DIGITS = 6


def num(value, digits: int = _DIGITS) -> Optional[float]:
    """``value`` rounded to ``digits`` significant digits (stable JSON), None when missing.

    >>> num(1234.56789), num(float("nan")), num(None)
    (1234.57, None, None)
    """
    if value is None:
        return None
    value = float(value)
    if not np.isfinite(value):
        return None
    return float(f"{value:.{digits}g}")


# ----- per cell -----------------------------------------------------------------------------

#: how projected solves that end in a solver error are read
SOLVER_ERRORS = ("exclude", "fail")
SOLVER_ERROR_TEXT = {
    "exclude": "a projected solve that ends in a solver error (projected status 'solver_failed') is counted in its own "
               "column and left out of the rates (it says nothing about k); --solver-errors fail counts it as a failure",
    "fail": "a projected solve that ends in a solver error counts as a failure (strict reading, --solver-errors fail)",
}
TIME_LIMIT_TEXT = ("a projected solve or trial that hits its time limit is a failure (a policy cannot wait for it); "
                   "a trial that raised or crashed is a failure, counted in the errors column")
CLASS_SCOPE = ("the class the instances were drawn from: Clopper-Pearson on the counts divided by the design effect "
               "1 + (m - 1) rho_U, rho_U the upper confidence limit of the intraclass correlation (Kish 1965; "
               "Rao & Scott 1992); with one replicate, or when every instance decides alone, a binomial on instances")
INSTANCES_SCOPE = "the instances measured: exact Clopper-Pearson on all trials, valid conditional on these instances"


def solver_error_mask(rows: pd.DataFrame) -> pd.Series:
    """Rows whose trial ran but whose projected solve ended in a solver error (its status 'error')."""
    return rows["status"].eq("ok") & rows["proj_status"].eq("solver_failed") & rows["kind"].isin(OPTIMIZATION_KINDS)


def _error_column(rows: pd.DataFrame, predicate: Predicate) -> pd.Series:
    """Per row: the error of its kind's error metric under the predicate (:func:`metric_error`; NaN when none)."""
    error = pd.Series(np.nan, index=rows.index)
    for kind in rows["kind"].unique():
        metric = predicate.error_metric(kind)
        if metric is not None:
            mask = rows["kind"].eq(kind)
            error[mask] = metric_error(rows.loc[mask, metric], metric)
    return error


def _per_k(cell: pd.DataFrame) -> pd.DataFrame:
    """Per k of one cell's kept rows: provenance label, trials that raised, error quantiles."""
    return cell.groupby("k", sort=True).agg(
        k_label=("k_label", "first"), errors=("status", lambda s: int((s != "ok").sum())),
        error_median=("error", "median"),
        error_q90=("error", lambda e: e.quantile(0.9) if e.notna().any() else np.nan))


def _grid(stats: CellStats, per_k: pd.DataFrame, solver_errors: pd.Series) -> list[dict]:
    klass = stats.klass
    return [{"k": int(k), "k_label": per_k.at[k, "k_label"] or "", "trials": int(stats.trials[i]),
             "successes": int(stats.successes[i]), "errors": int(per_k.at[k, "errors"]),
             "solver_errors": int(solver_errors.get(k, 0)), "instances": int(stats.instances_per_k[i]),
             "rate": num(stats.successes[i] / stats.trials[i]), "lower_bound": num(stats.lower[i]),
             "wilson_lower": num(stats.wilson[i]), "passes": bool(stats.passes[i]),
             "class_lower_bound": num(klass.lower[i]), "class_passes": bool(stats.class_passes[i]),
             "effective_trials": num(klass.effective_trials[i]), "cluster_size": num(klass.cluster_size[i]),
             "error_median": num(per_k.at[k, "error_median"]), "error_q90": num(per_k.at[k, "error_q90"])}
            for i, k in enumerate(stats.ks)]


def interval_scope(fit: LogisticFit) -> str:
    """What a transition's intervals hold for."""
    if fit.clusters is None:
        return "the instance measured (binomial covariance; one instance says nothing of a class)"
    return f"the class (cluster-robust covariance over {fit.clusters} instances)"


def transition(fit: LogisticFit, confidence: Confidence) -> dict:
    """JSON view of a logistic fit: k50 and k at the target rate with their intervals, or the reason."""
    if not fit.ok:
        low, high = fit.bracket
        return {"reason": fit.reason, "bracket": [num(low), num(high)], "intercept": None, "slope": None,
                "covariance": None, "clusters": fit.clusters, "interval_scope": "", "k50": None, "k50_interval": None, "k_target": None,
                "k_target_interval": None}
    k50, k50_low, k50_high = fit.k_at(0.5, confidence.level)
    k_target, target_low, target_high = fit.k_at(confidence.target, confidence.level)
    return {"reason": "", "bracket": None, "intercept": num(fit.intercept), "slope": num(fit.slope),
            "covariance": [[num(value) for value in line] for line in fit.covariance], "clusters": fit.clusters,
            "interval_scope": interval_scope(fit), "k50": num(k50), "k50_interval": [num(k50_low), num(k50_high)],
            "k_target": num(k_target), "k_target_interval": [num(target_low), num(target_high)]}


def _theory(kind: str, n_points: int, safe_k: Optional[int], class_safe_k: Optional[int], predicate: Predicate,
            eps: Optional[float], delta: float) -> dict:
    chosen, source = bounds.theory_eps(predicate, kind, eps)
    if chosen is None:
        return {"eps": None, "eps_source": source, "failure": delta, "bounds": {}}
    return {"eps": chosen, "eps_source": source, "failure": delta,
            "bounds": {name: {"k": bound["k"], "failure": bound["failure"], "ratio": num(bounds.ratio(bound["k"], safe_k)),
                              "class_ratio": num(bounds.ratio(bound["k"], class_safe_k))}
                       for name, bound in bounds.bound_k(n_points, chosen, delta, kind).items()}}


def _class_json(stats: CellStats, projected_dim: int, confidence: Confidence) -> dict:
    klass = stats.klass
    return {"safe_k": stats.class_safe_k,
            "safe_fraction": None if stats.class_safe_k is None else num(stats.class_safe_k / projected_dim),
            "reason": stats.class_reason, "scope": CLASS_SCOPE, "icc": num(klass.rho), "icc_upper": num(klass.rho_upper),
            "anova": {key: value if isinstance(value, int) else num(value) for key, value in klass.anova.as_dict().items()},
            "instances_needed": instances_needed(confidence.target, confidence.level)}


def cell_entry(cell: pd.DataFrame, predicate: Predicate, confidence: Confidence, eps: Optional[float],
               solver_errors: str = "exclude") -> Optional[dict]:
    """The table entry of one (family, size, params, projector, retrieval) cell from its rows.

    ``cell`` holds one row per trial with the columns of :func:`calib.analysis.rows.load_rows` plus
    ``success``, ``error`` and ``solver_error`` (see :func:`build_analysis`). Rows whose projected
    solve ended in a solver error are counted apart and, with ``solver_errors="exclude"``, left out
    of the counts. None when no row is left.
    """
    first = cell.iloc[0]
    kept = cell[~cell["solver_error"]] if solver_errors == "exclude" else cell
    if kept.empty:
        return None
    stats = cell_stats(kept["k"].to_numpy(), kept["instance_id"].to_numpy(), kept["success"].to_numpy(),
                       confidence.target, confidence.level)
    projected_dim, n_points = int(first["projected_dim"]), int(first["n_points"])
    solver_by_k = cell.loc[cell["solver_error"], "k"].value_counts()
    return {
        "family": first["family"], "size": first["size"], "params": json.loads(first["params"]),
        "class_params": json.loads(first["class_params"]), "projector": first["projector"],
        "retrieval": first["retrieval"], "kind": first["kind"], "projected_dim": projected_dim, "n_points": n_points,
        "instances": stats.counts.n_instances, "solver_errors": int(cell["solver_error"].sum()),
        "safe_k": stats.safe_k, "safe_fraction": None if stats.safe_k is None else num(stats.safe_k / projected_dim),
        "safe_k_reason": stats.reason, "safe_k_scope": INSTANCES_SCOPE,
        "class": _class_json(stats, projected_dim, confidence),
        "error_metric": predicate.error_metric(first["kind"]),
        "transition": transition(stats.fit, confidence),
        "theory": _theory(first["kind"], n_points, stats.safe_k, stats.class_safe_k, predicate, eps, confidence.delta),
        "grid": _grid(stats, _per_k(kept), solver_by_k),
        "features": cell_features(cell),
    } | policy_answer.entry_block(kept, confidence)


#: how the instances scope of a searched cell is decided (appended to :data:`INSTANCES_SCOPE`)
SEARCH_SCOPE = ("; the store was written by a k search: its safe k is the search's own claim (sequential bounds "
                "over the k values it tested, replayed from the stored trials), so the table and the search agree")


@dataclass(frozen=True)
class SearchVerdicts:
    """The k searches a store was written by, replayed from its trials: per searched cell, the claim
    the table states for it. ``verdicts`` maps (instance id, projector, retrieval) of every instance of
    a cell to (safe k or None, reason); they apply to the analysis of the searches' own rule."""

    predicate: Predicate
    confidence: Confidence
    verdicts: dict

    def applies(self, predicate: Predicate, confidence: Confidence) -> bool:
        """Whether an analysis under ``predicate`` at ``confidence`` is the one the searches decided."""
        return replace(predicate, name="") == replace(self.predicate, name="") and confidence == self.confidence

    def verdict(self, cell: pd.DataFrame) -> Optional[tuple]:
        first = cell.iloc[0]
        return self.verdicts.get((first["instance_id"], first["projector"], first["retrieval"]))


def apply_search(entry: dict, verdict: tuple) -> dict:
    """``entry`` with the search's claim as its instances-scope safe k; the class scope never claims
    less than the search does (none when the search found none). An entry whose grid rule already
    gives the search's k is returned unchanged (the same bytes as a table made without the searches)."""
    safe_k, reason = verdict
    m = entry["projected_dim"]
    if safe_k == entry["safe_k"]:
        return entry
    entry |= {"safe_k": safe_k, "safe_fraction": None if safe_k is None else num(safe_k / m), "safe_k_reason": reason,
              "safe_k_scope": INSTANCES_SCOPE + SEARCH_SCOPE}
    klass = entry["class"]
    if safe_k is None and klass["safe_k"] is not None:
        klass |= {"safe_k": None, "safe_fraction": None, "reason": f"the k search claims no safe k: {reason}"}
    elif safe_k is not None and klass["safe_k"] is not None and klass["safe_k"] < safe_k:
        klass |= {"safe_k": safe_k, "safe_fraction": num(safe_k / m)}
    return entry


def cell_features(cell: pd.DataFrame) -> Optional[dict]:
    """Median instance features of the cell's instances (:func:`calib.features.median_features`),
    rounded for stable JSON; None when the store holds none."""
    if "features" not in cell:
        return None
    stored = cell.drop_duplicates("instance_id")["features"]
    summary = median_features([json.loads(text) if isinstance(text, str) else None for text in stored])
    return None if summary is None else {name: value if name == "instances" else num(value) for name, value in summary.items()}


# ----- per class: laws ----------------------------------------------------------------------

def law_json(law: Law, sizes: list[str], n: list[int], values: list, name: str, censored: list[str]) -> dict:
    """JSON view of a law with one point per size; censored points carry the reason and no residual."""
    residuals = iter(law.residuals)
    points = [{"size": size, "n": int(count), name: value, "censored": bool(why), "censoring": why,
               "residual": num(next(residuals)) if (law.ok and not why) else None}
              for size, count, value, why in zip(sizes, n, values, censored)]
    return {"a": num(law.a), "C": num(law.C), "C_se": num(law.C_se), "n_min": law.n_min, "n_max": law.n_max,
            "reason": law.reason, "censored": sum(bool(why) for why in censored), "points": points}


def _law_of(entries: list[dict], values: list, reasons: list[str], name: str) -> tuple[Law, dict]:
    sizes = [entry["size"] for entry in entries]
    n = [entry["n_points"] for entry in entries]
    censored = [censoring(value, reason, entry["projected_dim"]) for value, reason, entry in zip(values, reasons, entries)]
    law = censored_law(n, values, censored)
    return law, law_json(law, sizes, n, values, name, censored)


def class_law(entries: list[dict], rule: Optional[dict] = None, rules: Optional[list] = None) -> dict:
    """The laws of one class (its entries across sizes, sorted by n) beside the published constants:
    for the safe k of both scopes and for k50, each fitted on its uncensored sizes only; with the
    class's policy rule (:func:`policy_rule`) when given, and the swept rule at both scopes
    (:func:`calib.analysis.classrule.folder_rules`, key ``rules``) when the k grid is a rule's."""
    entries = sorted(entries, key=lambda entry: (entry["n_points"], entry["size"]))
    first = entries[0]
    safe_law, safe_json = _law_of(entries, [e["safe_k"] for e in entries], [e["safe_k_reason"] for e in entries], "safe_k")
    _, class_json = _law_of(entries, [e["class"]["safe_k"] for e in entries], [e["class"]["reason"] for e in entries], "safe_k")
    k50 = [entry["transition"]["k50"] for entry in entries]
    _, k50_json = _law_of(entries, k50, [entry["transition"]["reason"] for entry in entries], "k50")
    eps, source = first["theory"]["eps"], first["theory"]["eps_source"]
    swept, rules = rules, {}
    if eps is not None:
        rules = {name: {"C": num(constant), "ratio": num(bounds.ratio(constant, safe_law.C))}
                 for name, constant in bounds.rule_constants(eps, first["theory"]["failure"], first["kind"]).items()}
    law = {key: first[key] for key in ("family", "class_params", "projector", "retrieval", "kind")} | {
        "safe_k_law": safe_json, "class_safe_k_law": class_json, "k50_law": k50_json,
        "theory": {"eps": eps, "eps_source": source, "rules": rules}, "policy_rule": rule,
    }
    return law | ({"rules": swept} if swept else {})


def policy_rule(rows: pd.DataFrame, confidence: Confidence, solver_errors: str) -> dict:
    """The rule k = f m certified across the sizes of one class (:mod:`calib.analysis.classrule`).

    The unit is the size for families whose sizes are files (every instance index the same
    problem), else the instance.
    """
    rows, unit, names, word = _rule_units(rows, solver_errors)
    return fraction_rule(rows["k_label"].fillna(""), unit.to_numpy(), rows["success"].to_numpy(), names,
                         confidence.target, confidence.level, word)


def swept_rules(rows: pd.DataFrame, confidence: Confidence, solver_errors: str) -> list:
    """The rule of the swept grid (k = f m, k = C ln n) at both scopes for one class, [] for another grid."""
    rows, unit, names, word = _rule_units(rows, solver_errors)
    return folder_rules(rows["k_label"].fillna(""), unit.to_numpy(), rows["success"].to_numpy(), names,
                        confidence.target, confidence.level, word)


def _rule_units(rows: pd.DataFrame, solver_errors: str):
    """(rows kept, unit per row, unit id -> name, unit word) of a class rule: the size for families whose
    sizes are files (every instance index the same problem), else the instance."""
    from calib.families import REGISTRY

    if solver_errors == "exclude":
        rows = rows[~rows["solver_error"]]
    family = REGISTRY.get(rows["family"].iloc[0])
    if family is not None and family.fixed:
        unit, names, word = rows["size"], {}, "file"
    else:
        unit = rows["instance_id"]
        names = {iid: f"{size} instance {iid[:12]}" for iid, size in zip(rows["instance_id"], rows["size"])}
        word = "instance"
    names = names or {size: size.split("=", 1)[-1] for size in rows["size"]}
    return rows, unit, names, word


def class_labels(analysis: "Analysis"):
    """entry or law of ``analysis`` (a :class:`calib.analysis.records.Analysis`) -> the short class text of
    :func:`class_namer` of its class_params, per family of the analysis."""
    namers = {family: class_namer([item.class_params for item in analysis.entries if item.family == family])
              for family in {item.family for item in analysis.entries}}
    return lambda item: namers[item.family](item.class_params) if item.family in namers else ""


def _class_key(entry: dict) -> tuple:
    return (entry["family"], json.dumps(entry["class_params"], sort_keys=True), entry["projector"], entry["retrieval"])


# ----- the table ----------------------------------------------------------------------------

#: original statuses without an optimum to calibrate against (the solver's verdict, not a failure)
NO_OPTIMUM = ("unbounded", "no_finite_optimum")


def unbounded_exclusions(rows: pd.DataFrame) -> tuple[pd.Series, list[dict]]:
    """(mask of rows whose original has no finite optimum, one ``excluded`` item per family and status).

    An unbounded original is a result, not an error: it is stored like any other. But it has no
    optimum to measure a gap against, and a row projection of it (a relaxation) is unbounded at
    every k, so its trials would only count as failures (or trivial successes) that say nothing
    about k. They are left out of the success rates and listed with the reason.
    """
    mask = rows["kind"].isin(OPTIMIZATION_KINDS) & rows["orig_status"].isin(NO_OPTIMUM)
    items = []
    for (family, kind, status), group in rows[mask].groupby(["family", "kind", "orig_status"], sort=True):
        items.append({"family": family, "kind": kind,
                      "reason": f"{group['instance_id'].nunique()} instance(s) with an original that is {status.replace('_', ' ')} "
                                f"({len(group)} rows): no optimum to compare a projection with, so they say nothing about k"})
    return mask, items


def build_analysis(rows: pd.DataFrame, predicate: Predicate, confidence: Confidence, eps: Optional[float] = None,
                   solver_errors: str = "exclude", policy: bool = False,
                   searches: Optional[SearchVerdicts] = None) -> dict:
    """One analysis (one predicate) of the tidy rows: excluded kinds and instances, entries, laws;
    with ``policy`` (or a predicate that requires saving time) each entry carries its policy answer;
    with ``searches`` (of this predicate), searched cells state the searches' claims (:func:`apply_search`)."""
    unbounded, excluded_unbounded = unbounded_exclusions(rows)
    rows = rows[~unbounded]
    covered = rows["kind"].map(predicate.covers).astype(bool)
    excluded = [{"family": family, "kind": kind,
                 "reason": f"the predicate checks nothing on {kind} problems (see the presets and --max-* options)"}
                for family, kind in sorted(set(zip(rows.loc[~covered, "family"], rows.loc[~covered, "kind"])))]
    excluded += excluded_unbounded
    entries = []
    if covered.any():
        rows = rows[covered]
        rows = rows.assign(success=evaluate(rows, predicate).astype(int), error=_error_column(rows, predicate),
                           solver_error=solver_error_mask(rows))
        if policy or predicate.faster:
            rows = pd.concat([rows, policy_answer.row_columns(rows, predicate)], axis=1)
        for key, cell in rows.groupby(CELL_KEYS, sort=True):
            entry = cell_entry(cell, predicate, confidence, eps, solver_errors)
            verdict = None if (searches is None or entry is None) else searches.verdict(cell)
            if verdict is not None:
                entry = apply_search(entry, verdict)
            if entry is None:
                excluded.append({"family": key[0], "kind": cell["kind"].iloc[0],
                                 "reason": f"{key[1]} / {key[3]} / {key[4]}: every projected solve ended in a solver error"})
            else:
                entries.append(entry)
    classes: dict[tuple, list] = {}
    for entry in entries:
        classes.setdefault(_class_key(entry), []).append(entry)
    rules, swept = {}, {}
    if entries:
        for key, class_rows in rows.groupby(CLASS_KEYS, sort=True):
            named = (key[0], json.dumps(json.loads(key[1]), sort_keys=True), key[2], key[3])
            rules[named] = policy_rule(class_rows, confidence, solver_errors)
            swept[named] = swept_rules(class_rows, confidence, solver_errors)
    laws = [class_law(members, rules.get(key), swept.get(key)) for key, members in sorted(classes.items())]
    return {"tau": primary_tau(predicate), "predicate": predicate.as_dict(), "excluded": excluded,
            "entries": entries, "laws": laws}


def check_solver_errors(value: str) -> str:
    """``--solver-errors`` validated: 'exclude' (default) or 'fail'."""
    if value not in SOLVER_ERRORS:
        raise InputError("--solver-errors", f"unknown value {value!r}", f"choose one of {', '.join(SOLVER_ERRORS)}")
    return value


def build_table(store: Store, predicate: Predicate, confidence: Confidence,
                taus: Optional[Iterable[float]] = None, eps: Optional[float] = None,
                rows: Optional[pd.DataFrame] = None, solver_errors: str = "exclude", policy: bool = False,
                searches: Optional[SearchVerdicts] = None) -> dict:
    """The JSON-ready safe-k table of a store: one analysis per tau of the ladder (or the predicate alone);
    ``policy`` adds the policy answer of :mod:`calib.analysis.policy` (it rests on measured times);
    ``searches`` (the store's k searches replayed) decide the cells of the analysis of their own rule."""
    solver_errors = check_solver_errors(solver_errors)
    rows = load_rows(store) if rows is None else rows
    if rows.empty:
        raise InputError(str(store.path), "the store has no trial rows yet", "run `calib run SPEC` first")
    predicates = [predicate] if not taus else [with_tau(predicate, tau) for tau in sorted(set(taus))]
    meta = store.meta()
    kinds = sorted(set(rows["kind"]))
    table = {
        "format": FORMAT, "format_version": VERSION, "code_version": __version__,
        "campaign": {"name": meta.get("name"), "spec_fingerprint": meta.get("fingerprint"),
                     "root_seed": store.meta_int("root_seed", 0),
                     "store_schema": store.meta_int("schema_version", SCHEMA_VERSION)},
        "target": {"success_rate": num(confidence.target, 12), "delta": confidence.delta, "confidence": confidence.level,
                   "bound": "instances scope: one-sided Clopper-Pearson lower bound on all trials (Wilson lower bound "
                            "shown beside it)",
                   "class_bound": CLASS_SCOPE,
                   "interval": "two-sided delta-method interval on ln k at the same confidence, from the cluster-robust "
                               "covariance over instances (Student t with instances - 1 degrees of freedom)",
                   "solver_errors": solver_errors, "solver_errors_rule": SOLVER_ERROR_TEXT[solver_errors],
                   "time_limit": TIME_LIMIT_TEXT},
        "theory": {"rules": bounds.rule_names(kinds), "eps_choice": eps, "eps_convention": bounds.eps_convention(kinds),
                   "failure": confidence.delta},
        "notice": NOTICE,
        "analyses": [build_analysis(rows, each, confidence, eps, solver_errors, policy,
                                    searches if searches is not None and searches.applies(each, confidence) else None)
                     for each in predicates],
    }
    return seal(table)


def strip_policy(table: dict) -> dict:
    """``table`` without the policy answers (the parts that rest on measured times), sealed again: the
    table :func:`build_table` gives without ``policy`` (the report needs them, the table file holds
    them only when asked). A table whose predicate requires time saved keeps them."""
    analyses = []
    for analysis in table["analyses"]:
        if analysis["predicate"].get("faster"):
            analyses.append(analysis)
            continue
        entries = [{key: value for key, value in entry.items() if key != "policy"} for entry in analysis["entries"]]
        analyses.append({**analysis, "entries": entries})
    body = {key: value for key, value in table.items() if key != "checksum"}
    return seal({**body, "analyses": analyses})


def table_to_frame(table: dict) -> pd.DataFrame:
    """Flat CSV view: one line per (tau, cell, k) with the cell's safe k, transition and law repeated."""
    lines = []
    for analysis in table["analyses"]:
        laws = {(law["family"], json.dumps(law["class_params"], sort_keys=True), law["projector"], law["retrieval"]): law
                for law in analysis["laws"]}
        for entry in analysis["entries"]:
            law = laws[_class_key(entry)]["safe_k_law"]
            base = {"tau": analysis["tau"], "predicate": analysis["predicate"]["name"]}
            base |= {key: entry[key] for key in ("family", "size", "projector", "retrieval", "kind", "projected_dim",
                                                  "n_points", "safe_k", "safe_fraction", "safe_k_reason")}
            base |= {"instances": entry["instances"], "class_safe_k": entry["class"]["safe_k"],
                     "class_reason": entry["class"]["reason"], "cell_solver_errors": entry["solver_errors"]}
            base |= {"k50": entry["transition"]["k50"], "k_target": entry["transition"]["k_target"],
                     "law_a": law["a"], "law_C": law["C"], "error_metric": entry["error_metric"]}
            if "policy" in entry:
                base["policy_k"] = entry["policy"]["k"]
            features = entry.get("features") or {}
            base |= {f"features_{name}": features.get(name) for name in NUMERIC}
            for point in entry["grid"]:
                lines.append({**base, **point})
    frame = pd.DataFrame(lines)
    if not frame.empty:
        for column in ("safe_k", "class_safe_k"):
            frame[column] = frame[column].astype("Int64")
    return frame


def write_table(table: dict, json_path: Optional[Path] = None, csv_path: Optional[Path] = None) -> None:
    """Write the table as JSON (sorted keys, stable bytes) and/or CSV (each whole or not at all)."""
    from calib.outputs import write_file

    for path, text, option in ((json_path, lambda: dumps(table), "--json"),
                               (csv_path, lambda: table_to_frame(table).to_csv(index=False, lineterminator="\n"), "--csv")):
        if path is not None:
            write_file(path, text(), option)
