"""Safe-k tables: from the raw store to per-(family, size, projector, retrieval) safe k and laws.

For each cell and each swept k: trials, successes, success rate, the one-sided Clopper–Pearson
and Wilson lower bounds at the chosen confidence, and the median and 90th percentile of the error
metric. Per cell:

- the safe k: the smallest swept k whose Clopper–Pearson bound reaches the target rate 1 - delta
  while every larger swept k does too (a monotone rule: a lucky small k below a failing larger one
  is not trusted); null with the reason when there is none;
- the transition from a logistic fit of success on ln k (:mod:`calib.analysis.logistic`): k50 and
  the k where the fitted rate is 1 - delta, each with a delta-method interval;
- the published bounds at the eps of :mod:`calib.analysis.bounds` and their ratio to the safe k.

Per class (family with its non-size parameters, projector, retrieval) across sizes: the law
k = a + C ln n for the safe k and for k50 (:mod:`calib.analysis.law`), beside the constants of the
published bounds.

A table holds one analysis per tolerance of a ladder (``taus``), all at one confidence target.
Timings are not part of the table (they differ between two runs of one campaign, the table must
not): see :mod:`calib.analysis.timing`. The one exception is asked for explicitly: the policy
answer (:mod:`calib.analysis.policy`, ``policy=True`` or a predicate requiring time saved) rests
on measured times, and a table carrying it can differ between runs. These are empirical statements about the instances
measured, not proofs.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Optional

import numpy as np
import pandas as pd

from calib import SCHEMA_VERSION, __version__, theory
from calib.analysis import bounds
from calib.analysis import policy as policy_answer
from calib.analysis.law import Law, fit_law
from calib.analysis.logistic import LogisticFit, fit_logistic
from calib.analysis.stats import clopper_pearson_lower, wilson_lower
from calib.analysis.success import Predicate, evaluate, primary_tau, with_tau
from calib.analysis.tablefile import FORMAT, VERSION, dumps, seal
from calib.errors import InputError
from calib.metrics import FIELDS
from calib.sweep.store import DAMAGED_FIX, Store

CELL_KEYS = ["family", "size", "params", "projector", "retrieval"]
CLASS_KEYS = ["family", "class_params", "projector", "retrieval"]
NOTICE = ("Safe-k tables are empirical evidence on the instances measured, not a proof: check a reduction "
          "policy on your own instances (`calib probe`) before relying on it in production.")
ALL_PASS = "all swept k pass: the safe k may be smaller than the grid shows"
_DIGITS = 6


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


# ----- rows ---------------------------------------------------------------------------------

def _size_keys(family: str, params: dict) -> tuple:
    from calib.families import REGISTRY

    return REGISTRY[family].size_keys if family in REGISTRY else tuple(sorted(params))


def _size_label(family: str, params: dict) -> str:
    from calib.families.base import size_label

    return size_label(_size_keys(family, params), params)


def _class_params(family: str, params: dict) -> str:
    keys = set(_size_keys(family, params))
    return json.dumps({key: value for key, value in params.items() if key not in keys}, sort_keys=True)


def load_rows(store: Store) -> pd.DataFrame:
    """Tidy table: one row per (trial, retrieval) with instance columns and every metric field.

    Rows that calib could not have written (metrics or parameters that are not JSON objects, a
    trial without its instance, a k that is not a positive integer) are refused with
    :class:`InputError` naming the store and the trial, never guessed around.
    """
    db = store.db
    try:
        trials = pd.read_sql_query("SELECT * FROM trials ORDER BY trial_id, retrieval", db)
        instances = pd.read_sql_query(
            "SELECT instance_id, family, params, idx, kind, projected_dim, n_points, orig_seconds FROM instances", db)
    except (pd.errors.DatabaseError, ValueError) as error:
        raise InputError(str(store.path), f"cannot read the trial rows: {error}", DAMAGED_FIX) from None
    rows = trials.merge(instances, on="instance_id", how="left", validate="many_to_one")
    _check_rows(rows, store.path)
    metrics = [_json_object(text, store.path, trial, "metrics") if isinstance(text, str) else {}
               for text, trial in zip(rows["metrics"], rows["trial_id"])]
    expanded = pd.DataFrame.from_records([{name: record.get(name) for name in FIELDS} for record in metrics],
                                         index=rows.index, columns=list(FIELDS))
    rows = pd.concat([rows.drop(columns=["metrics"]), expanded], axis=1)
    decoded = [_json_object(params, store.path, trial, "instance params") for params, trial in zip(rows["params"], rows["trial_id"])]
    rows["size"] = [_size_label(family, params) for family, params in zip(rows["family"], decoded)]
    rows["class_params"] = [_class_params(family, params) for family, params in zip(rows["family"], decoded)]
    return rows


def _check_rows(rows: pd.DataFrame, path) -> None:
    """Refuse rows whose instance is missing or whose k or replicate is not an integer."""
    orphans = rows["family"].isna()
    if orphans.any():
        trial = rows.loc[orphans, "trial_id"].iloc[0]
        raise InputError(str(path), f"trial {trial} names an instance that is not stored", DAMAGED_FIX)
    for column, minimum in (("k", 1), ("replicate", 0), ("projected_dim", 1), ("n_points", 1)):
        values = rows[column]
        if pd.api.types.is_integer_dtype(values.dtype):  # what SQLite gives for INTEGER cells: one vector test
            good = values >= minimum
        else:
            good = values.map(lambda v: isinstance(v, (int, np.integer)) and not isinstance(v, bool) and v >= minimum)
        if not good.all():
            bad = rows.loc[~good.astype(bool)].iloc[0]
            raise InputError(str(path), f"trial {bad['trial_id']} has {column} = {bad[column]!r}, not an integer >= {minimum}", DAMAGED_FIX)


def _json_object(text, path, trial: str, what: str) -> dict:
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        value = None
    if not isinstance(value, dict):
        raise InputError(str(path), f"trial {trial}: its {what} are not a JSON object", DAMAGED_FIX)
    return value


# ----- per cell -----------------------------------------------------------------------------

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


def _error_column(rows: pd.DataFrame, predicate: Predicate) -> pd.Series:
    """Per row: |value| of the error metric of its kind under the predicate (NaN when none)."""
    error = pd.Series(np.nan, index=rows.index)
    for kind in rows["kind"].unique():
        metric = predicate.error_metric(kind)
        if metric is not None:
            mask = rows["kind"].eq(kind)
            error[mask] = pd.to_numeric(rows.loc[mask, metric], errors="coerce").abs()
    return error


def summarise(rows: pd.DataFrame, predicate: Predicate, confidence: Confidence, policy: bool = False) -> pd.DataFrame:
    """Per (cell, k): trials, successes, rate, bounds, error quantiles (and, with ``policy``, the
    columns of :mod:`calib.analysis.policy`); rows already covered."""
    rows = rows.assign(success=evaluate(rows, predicate).astype(int), error=_error_column(rows, predicate))
    extra = {}
    if policy:
        rows = pd.concat([rows, policy_answer.row_columns(rows, predicate)], axis=1)
        extra = policy_answer.aggregations()
    grouped = rows.groupby(CELL_KEYS + ["k"], sort=True).agg(**extra,
        trials=("success", "size"), successes=("success", "sum"), kind=("kind", "first"),
        class_params=("class_params", "first"), projected_dim=("projected_dim", "first"),
        n_points=("n_points", "first"), k_label=("k_label", "first"),
        errors=("status", lambda s: int((s != "ok").sum())),
        error_median=("error", "median"), error_q90=("error", lambda e: e.quantile(0.9) if e.notna().any() else np.nan),
    ).reset_index()
    grouped["rate"] = grouped["successes"] / grouped["trials"]
    grouped["lower_bound"] = clopper_pearson_lower(grouped["successes"], grouped["trials"], confidence.level)
    grouped["wilson_lower"] = wilson_lower(grouped["successes"], grouped["trials"], confidence.level)
    grouped["passes"] = grouped["lower_bound"] >= confidence.target
    return grouped


def _grid(cell: pd.DataFrame) -> list[dict]:
    return [{"k": int(row.k), "k_source": row.k_label or "", "trials": int(row.trials),
             "successes": int(row.successes), "errors": int(row.errors), "rate": num(row.rate),
             "lower_bound": num(row.lower_bound), "wilson_lower": num(row.wilson_lower), "passes": bool(row.passes),
             "error_median": num(row.error_median), "error_q90": num(row.error_q90)}
            for row in cell.itertuples()]


def transition(fit: LogisticFit, confidence: Confidence) -> dict:
    """JSON view of a logistic fit: k50 and k at the target rate with their intervals, or the reason."""
    if not fit.ok:
        low, high = fit.bracket
        return {"reason": fit.reason, "bracket": [num(low), num(high)], "intercept": None, "slope": None,
                "covariance": None, "k50": None, "k50_interval": None, "k_target": None, "k_target_interval": None}
    k50, k50_low, k50_high = fit.k_at(0.5, confidence.level)
    k_target, target_low, target_high = fit.k_at(confidence.target, confidence.level)
    return {"reason": "", "bracket": None, "intercept": num(fit.intercept), "slope": num(fit.slope),
            "covariance": [[num(value) for value in line] for line in fit.covariance],
            "k50": num(k50), "k50_interval": [num(k50_low), num(k50_high)],
            "k_target": num(k_target), "k_target_interval": [num(target_low), num(target_high)]}


def _theory(kind: str, n_points: int, safe_k: Optional[int], predicate: Predicate, eps: Optional[float]) -> dict:
    chosen, source = bounds.theory_eps(predicate, kind, eps)
    if chosen is None:
        return {"eps": None, "eps_source": source, "bounds": {}}
    return {"eps": chosen, "eps_source": source,
            "bounds": {name: {"k": k, "ratio": num(bounds.ratio(k, safe_k))}
                       for name, k in bounds.bound_k(n_points, chosen).items()}}


def cell_entry(cell: pd.DataFrame, predicate: Predicate, confidence: Confidence, eps: Optional[float]) -> dict:
    """The table entry of one (family, size, params, projector, retrieval) cell, sorted by k."""
    cell = cell.sort_values("k")
    first = cell.iloc[0]
    safe_k, reason = safe_k_rule(cell["k"], cell["passes"])
    fit = fit_logistic(cell["k"], cell["successes"], cell["trials"])
    projected_dim, n_points = int(first["projected_dim"]), int(first["n_points"])
    return {
        "family": first["family"], "size": first["size"], "params": json.loads(first["params"]),
        "class_params": json.loads(first["class_params"]), "projector": first["projector"],
        "retrieval": first["retrieval"], "kind": first["kind"], "projected_dim": projected_dim, "n_points": n_points,
        "safe_k": safe_k, "safe_fraction": None if safe_k is None else num(safe_k / projected_dim),
        "safe_k_reason": reason, "error_metric": predicate.error_metric(first["kind"]),
        "transition": transition(fit, confidence),
        "theory": _theory(first["kind"], n_points, safe_k, predicate, eps),
        "grid": _grid(cell),
    } | policy_answer.entry_block(cell, confidence)


# ----- per class: laws ----------------------------------------------------------------------

def law_json(law: Law, sizes: list[str], n: list[int], values: list, name: str) -> dict:
    """JSON view of a law with one point per size (residual None where the size has no value)."""
    residuals = iter(law.residuals)
    points = [{"size": size, "n": int(count), name: value,
               "residual": num(next(residuals)) if (law.ok and value is not None) else None}
              for size, count, value in zip(sizes, n, values)]
    return {"a": num(law.a), "C": num(law.C), "C_se": num(law.C_se), "n_min": law.n_min, "n_max": law.n_max,
            "reason": law.reason, "points": points}


def class_law(entries: list[dict]) -> dict:
    """The laws of one class (its entries across sizes, sorted by n) beside the published constants."""
    entries = sorted(entries, key=lambda entry: (entry["n_points"], entry["size"]))
    first = entries[0]
    sizes = [entry["size"] for entry in entries]
    n = [entry["n_points"] for entry in entries]
    safe = [entry["safe_k"] for entry in entries]
    k50 = [entry["transition"]["k50"] for entry in entries]
    safe_law, k50_law = fit_law(n, safe), fit_law(n, k50)
    safe_json = law_json(safe_law, sizes, n, safe, "safe_k")
    for point, entry in zip(safe_json["points"], entries):
        point["censored"] = entry["safe_k_reason"] == ALL_PASS
    eps, source = first["theory"]["eps"], first["theory"]["eps_source"]
    rules = {}
    if eps is not None:
        rules = {name: {"C": num(constant), "ratio": num(bounds.ratio(constant, safe_law.C))}
                 for name, constant in bounds.rule_constants(eps).items()}
    return {key: first[key] for key in ("family", "class_params", "projector", "retrieval", "kind")} | {
        "safe_k_law": safe_json, "k50_law": law_json(k50_law, sizes, n, k50, "k50"),
        "theory": {"eps": eps, "eps_source": source, "rules": rules},
    }


def class_namer(items: list[dict]):
    """class_params -> short text naming only the parameters that differ between the items' classes.

    >>> name = class_namer([{"class_params": {"rank": 12, "cost": "c"}}, {"class_params": {"rank": None, "cost": "c"}}])
    >>> name({"rank": 12, "cost": "c"})
    'rank=12'
    """
    keys = sorted({key for item in items for key in item["class_params"]})
    varying = [key for key in keys if len({json.dumps(item["class_params"].get(key)) for item in items}) > 1]
    return lambda params: " ".join(f"{key}={json.dumps(params.get(key))}" for key in varying)


def class_labels(analysis: dict):
    """(family, class_params) -> the short class text of :func:`class_namer`, per family of the analysis."""
    namers = {family: class_namer([item for item in analysis["entries"] if item["family"] == family])
              for family in {item["family"] for item in analysis["entries"]}}
    return lambda item: namers[item["family"]](item["class_params"]) if item["family"] in namers else ""


def _class_key(entry: dict) -> tuple:
    return (entry["family"], json.dumps(entry["class_params"], sort_keys=True), entry["projector"], entry["retrieval"])


# ----- the table ----------------------------------------------------------------------------

#: original statuses without an optimum to calibrate against (the solver's verdict, not a failure)
NO_OPTIMUM = ("unbounded", "infeasible_or_unbounded")


def unbounded_exclusions(rows: pd.DataFrame) -> tuple[pd.Series, list[dict]]:
    """(mask of rows whose original has no finite optimum, one ``excluded`` item per family and status).

    An unbounded original is a result, not an error: it is stored like any other. But it has no
    optimum to measure a gap against, and a row projection of it (a relaxation) is unbounded at
    every k, so its trials would only count as failures (or trivial successes) that say nothing
    about k. They are left out of the success rates and listed with the reason.
    """
    mask = rows["kind"].isin(["lp", "sdp", "qp"]) & rows["orig_status"].isin(NO_OPTIMUM)
    items = []
    for (family, kind, status), group in rows[mask].groupby(["family", "kind", "orig_status"], sort=True):
        items.append({"family": family, "kind": kind,
                      "reason": f"{group['instance_id'].nunique()} instance(s) with an original that is {status.replace('_', ' ')} "
                                f"({len(group)} rows): no optimum to compare a projection with, so they say nothing about k"})
    return mask, items


def build_analysis(rows: pd.DataFrame, predicate: Predicate, confidence: Confidence, eps: Optional[float] = None,
                   policy: bool = False) -> dict:
    """One analysis (one predicate) of the tidy rows: excluded kinds and instances, entries, laws;
    with ``policy`` (or a predicate that requires saving time) each entry carries its policy answer."""
    unbounded, excluded_unbounded = unbounded_exclusions(rows)
    rows = rows[~unbounded]
    covered = rows["kind"].map(predicate.covers).astype(bool)
    excluded = [{"family": family, "kind": kind,
                 "reason": f"the predicate checks nothing on {kind} problems (see the presets and --tol-* options)"}
                for family, kind in sorted(set(zip(rows.loc[~covered, "family"], rows.loc[~covered, "kind"])))]
    excluded += excluded_unbounded
    entries = []
    if covered.any():
        summary = summarise(rows[covered], predicate, confidence, policy or predicate.faster)
        entries = [cell_entry(cell, predicate, confidence, eps) for _, cell in summary.groupby(CELL_KEYS, sort=True)]
    classes: dict[tuple, list] = {}
    for entry in entries:
        classes.setdefault(_class_key(entry), []).append(entry)
    laws = [class_law(members) for _, members in sorted(classes.items())]
    return {"tau": primary_tau(predicate), "predicate": predicate.as_dict(), "excluded": excluded,
            "entries": entries, "laws": laws}


def build_table(store: Store, predicate: Predicate, confidence: Confidence,
                taus: Optional[Iterable[float]] = None, eps: Optional[float] = None,
                rows: Optional[pd.DataFrame] = None, policy: bool = False) -> dict:
    """The JSON-ready safe-k table of a store: one analysis per tau of the ladder (or the predicate alone);
    ``policy`` adds the policy answer of :mod:`calib.analysis.policy` (it depends on measured times)."""
    rows = load_rows(store) if rows is None else rows
    if rows.empty:
        raise InputError(str(store.path), "the store has no trial rows yet", "run `calib run SPEC` first")
    predicates = [predicate] if not taus else [with_tau(predicate, tau) for tau in sorted(set(taus))]
    meta = store.meta()
    table = {
        "format": FORMAT, "format_version": VERSION, "code_version": __version__,
        "campaign": {"name": meta.get("name"), "spec_fingerprint": meta.get("fingerprint"),
                     "root_seed": store.meta_int("root_seed", 0),
                     "store_schema": store.meta_int("schema_version", SCHEMA_VERSION)},
        "target": {"success_rate": num(confidence.target, 12), "delta": confidence.delta, "confidence": confidence.level,
                   "bound": "one-sided Clopper-Pearson lower bound (Wilson lower bound shown beside it)",
                   "interval": "two-sided delta-method interval on ln k at the same confidence"},
        "theory": {"rules": sorted(theory.RULES), "eps_choice": eps, "eps_convention": bounds.EPS_CONVENTION},
        "notice": NOTICE,
        "analyses": [build_analysis(rows, each, confidence, eps, policy) for each in predicates],
    }
    return seal(table)


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
            base |= {"k50": entry["transition"]["k50"], "k_target": entry["transition"]["k_target"],
                     "law_a": law["a"], "law_C": law["C"], "error_metric": entry["error_metric"]}
            if "policy" in entry:
                base["policy_k"] = entry["policy"]["k"]
            for point in entry["grid"]:
                lines.append({**base, **point})
    frame = pd.DataFrame(lines)
    if not frame.empty:
        frame["safe_k"] = frame["safe_k"].astype("Int64")
    return frame


def write_table(table: dict, json_path: Optional[Path] = None, csv_path: Optional[Path] = None) -> None:
    """Write the table as JSON (sorted keys, stable bytes) and/or CSV (each whole or not at all)."""
    from calib.outputs import write_file

    for path, text, option in ((json_path, lambda: dumps(table), "--json"),
                               (csv_path, lambda: table_to_frame(table).to_csv(index=False, lineterminator="\n"), "--csv")):
        if path is not None:
            write_file(path, text(), option)
