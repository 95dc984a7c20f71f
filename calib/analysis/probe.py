"""What a probe's records say: their summary and the text `calib probe` prints.

A probe (:mod:`calib.sweep.probe`) gives one :mod:`calib.metrics` record per (replicate,
retrieval). :func:`summarise` reduces them: the projection's metrics (one row per replicate, the
fields of :data:`PROJECTION_FIELDS`) by median and maximum, and per retrieval its metrics
(:data:`RETRIEVAL_FIELDS`), its successes s of r trials under the predicate with the one-sided
Clopper–Pearson lower bound of s / r at the confidence level (Clopper & Pearson 1934), and the same
for "usable and faster than the fair baseline" (:func:`calib.verdicts.success.saves_time`).
:func:`render` prints a probe (`calib probe --find-k` prints a probe's k search in
:mod:`calib.commands.probe`: its trace is the engine's). Costs: linear in the records.
"""

from __future__ import annotations

import math

import numpy as np

from calib.checks import is_real
from calib.problems.kinds import counting
from calib.wording import counted, fold, wrapped

#: metric fields that differ between the retrievals of one replicate (the rest describe the solves)
RETRIEVAL_FIELDS = ("obj_error", "obj_ratio", "feas_error", "sign_violation", "decision_error", "completion_shortfall",
                    "cut_ratio", "cut_gain_kept", "exact", "retrieval_iterations",
                    "widening_rounds", "columns_share", "iterations_saved", "warm_seconds_saved", "t_retrieve", "t_factor", "t_total",
                    "time_saved", "distortion_max", "distortion_q99", "pairs_checked", "rows_violated", "cluster_cost_ratio",
                    "cluster_disagreement")
#: fields that describe the projection and its solve (shared by the retrievals of one replicate)
PROJECTION_FIELDS = ("proj_status", "proj_method", "proj_objective", "proj_feasible", "proj_gap", "feasibility_agrees",
                     "proj_iterations", "t_sketch", "t_solve_proj")
#: closing line of every probe: what the numbers are and are not
NOTICE_LINE = ("These are measurements on this instance and machine, not a proof; end-to-end times vary between runs.")


def _stats(values: list) -> dict:
    numbers = [float(v) for v in values if is_real(v) and math.isfinite(v)]
    if not numbers:
        return {}
    return {"median": float(np.median(numbers)), "max": float(np.max(numbers)), "n": len(numbers)}


def _summary_block(rows: list[dict], fields) -> dict:
    stats = {field: _stats([row[field] for row in rows]) for field in fields}
    return {field: value for field, value in stats.items() if value}


def summarise(records: list[dict], kind: str, predicate, confidence) -> dict:
    """The projection's metrics (one row per replicate) and, per retrieval, its metrics, successes and
    their one-sided Clopper–Pearson lower bound under ``predicate``."""
    from calib.verdicts.stats import clopper_pearson_lower
    from calib.verdicts.success import evaluate, record_frame, saves_time

    first = [row for row in records if row["retrieval"] == records[0]["retrieval"]]
    statuses: dict = {}
    for row in first:
        statuses[str(row["proj_status"])] = statuses.get(str(row["proj_status"]), 0) + 1
    frame = record_frame(records, kind)
    success = evaluate(frame, predicate).tolist()
    faster = saves_time(frame).tolist() if kind != "points" else [False] * len(records)
    out = {"projection": {"proj_status": statuses, "metrics": _summary_block(first, PROJECTION_FIELDS)}, "retrievals": {}}
    for name in dict.fromkeys(row["retrieval"] for row in records):
        picked = [ok for row, ok in zip(records, success) if row["retrieval"] == name]
        quick = [ok and fast for row, ok, fast in zip(records, success, faster) if row["retrieval"] == name]
        successes, trials, policy = int(sum(picked)), len(picked), int(sum(quick))
        out["retrievals"][name] = {
            "metrics": _summary_block([row for row in records if row["retrieval"] == name], RETRIEVAL_FIELDS),
            "successes": successes, "trials": trials,
            "success_lower_bound": float(clopper_pearson_lower(successes, trials, confidence.level)),
            "policy_successes": policy,
            "policy_lower_bound": float(clopper_pearson_lower(policy, trials, confidence.level)),
        }
    return out


def _fmt(value) -> str:
    """Short text for a metric value: counts as integers, other numbers with 4 significant digits.

    >>> _fmt(200000.0), _fmt(0.000123456), _fmt(True), _fmt(12)
    ('200000', '0.0001235', 'True', '12')
    """
    if isinstance(value, (bool, str, int)) or value is None:
        return str(value)
    if float(value).is_integer() and abs(value) < 1e12:
        return str(int(value))
    return f"{value:.4g}"


#: printed with :func:`objective_text`: an optimum is only of use with its digits
OBJECTIVES = ("orig_objective", "proj_objective")


def objective_text(value) -> str:
    """An objective value with 12 significant digits.

    >>> objective_text(-2331389.8243), objective_text(7.0), objective_text(None)
    ('-2331389.8243', '7', 'None')
    """
    return str(value) if value is None else f"{float(value):.12g}"


def _field(field: str, value) -> str:
    return objective_text(value) if field in OBJECTIVES else _fmt(value)


def _unit(field: str) -> str:
    """The unit of a metric field as printed beside its value (:data:`calib.metrics.FIELDS`).

    >>> _unit("t_sketch"), _unit("obj_error"), _unit("proj_iterations"), _unit("exact")
    ('s', 'rel.', '', '')
    """
    from calib.metrics import FIELDS

    units = FIELDS[field].units if field in FIELDS else ""
    return {"s": "s", "ratio": "rel."}.get(units, "")


def _pairs(record: dict, fields) -> str:
    return "  ".join(f"{field} {_field(field, record[field])}" + (f" {_unit(field)}" if _unit(field) else "")
                     for field in fields if record.get(field) is not None)


#: what the units of the replicate lines mean
UNITS_LINE = ("units: s = seconds; rel. = relative to the instance's own scale (calib.metrics: 0.05 = 5%); "
              "field names are those of the store and `calib export`")


def verdict_lines(target, k: int, summary: dict, predicate, confidence) -> list[str]:
    """Per retrieval: the success count under ``predicate`` with its bound, against the target; then
    (optimization kinds) whether it is usable and faster end to end than the fair baseline."""
    lines = []
    tolerances = predicate.describe()
    for name, entry in summary["retrievals"].items():
        verdict = "meets" if entry["success_lower_bound"] >= 1.0 - confidence.delta else "below"
        lines.append(f"  {name}: success {entry['successes']}/{entry['trials']} under '{predicate.name}' "
                     f"({tolerances or 'classification only'}), lower bound {entry['success_lower_bound']:.3f} "
                     f"at confidence {confidence.level:g}: {verdict} the target rate {1.0 - confidence.delta:g}")
        if target.kind != "points":
            verdict = "usable and faster" if entry["policy_lower_bound"] >= 1.0 - confidence.delta else "no time saved"
            lines.append(f"    policy at k = {k}: {entry['policy_successes']}/{entry['trials']} usable and faster end to end "
                         f"than the fair baseline, lower bound {entry['policy_lower_bound']:.3f}: {verdict} at this k")
    return lines


def render(target, original, choice, k: int, k_label: str, m: int, records: list[dict], summary: dict,
           predicate, confidence, baseline=None) -> str:
    """The human-readable report of a probe: what was probed, the verdict, the summary, then every replicate."""
    objective = f", objective {objective_text(original.objective)}" if original.ok else ""
    replicates = sorted({r["replicate"] for r in records})
    lines = [
        f"probe: {target.label} ({target.kind}; projected dimension m = {m}, n = {target.n_points} points)",
        f"  n and m: {counting(target.kind)}",
        f"original: {original.status}{objective}, {original.iterations} iterations, {original.seconds:.4g} s",
        f"projector {choice.label}, k = {k} ({k_label}), {counted(len(replicates), 'replicate')}",
    ]
    if baseline is not None and target.kind != "points":
        methods = ", ".join(f"{name} {r.status} {r.seconds:.4g} s" for name, r in baseline.results.items())
        lines.insert(3, f"fair baseline: {baseline.fastest} ({baseline.seconds:.4g} s), the fastest of: {methods}")
    lines += ["", f"verdict at k = {k}:"] + verdict_lines(target, k, summary, predicate, confidence)
    projection = summary["projection"]
    statuses = ", ".join(f"{key} {count}" for key, count in projection["proj_status"].items() if key != "None")
    lines += ["", "summary (median / max over replicates):", f"  projection: {statuses or 'nothing to solve'}"]
    lines += _stat_lines(projection["metrics"])
    for name, entry in summary["retrievals"].items():
        lines.append(f"  {name}:")
        lines += _stat_lines(entry["metrics"])
    lines += ["", "replicate by replicate:", f"({UNITS_LINE})"]
    for replicate in replicates:
        rows = [r for r in records if r["replicate"] == replicate]
        lines += _wrap(f"replicate {replicate}: " + _pairs(rows[0], PROJECTION_FIELDS), "")
        width = max(len(r["retrieval"]) for r in rows)
        for r in rows:
            lines += _wrap(f"{r['retrieval']:<{width}}  " + (_pairs(r, RETRIEVAL_FIELDS)
                                                             or "(no point: the projected solve did not succeed)"), "  ")
    lines += ["", NOTICE_LINE]
    return fold(lines)


def _wrap(text: str, indent: str) -> list[str]:
    return wrapped(text, indent, "      ")


def _stat_lines(metrics: dict) -> list[str]:
    return [f"    {field:<22} {_field(field, stats['median'])} / {_field(field, stats['max'])}"
            + (f" {_unit(field)}" if _unit(field) else "") for field, stats in metrics.items()]
