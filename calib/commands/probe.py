"""``calib probe TARGET``: what would happen to one model at one k.

TARGET is one of: a registered family with ``--param key=value`` parameters (instance 0 of that
family); an MPS file (read as an LP in standard form: the family ``mps-dir`` with ``dir`` = the
folder as written and ``name`` = the file name); or a saved instance (the ``STEM.json`` manifest of
:func:`calib.instance_io.save_instance`, any kind). The original is solved once; then each
replicate draws a projector, solves the projected problem and runs the retrievals, exactly as one
campaign trial does (:func:`calib.trial.run_trial`). The random streams are those of a
campaign with ``root_seed = --seed`` on the same instance (family, parameters, index), so a probe
reproduces that campaign's rows. The output lists the metrics of every replicate, then the median
and maximum of each metric and the success count under the chosen predicate with its one-sided
Clopper–Pearson lower bound.

k: ``--k K`` directly (or a list ``--k 20,40``: one block per k), or ``--eps E`` through a
published bound (``--rule``) with the family's point count (for an MPS file: its standard-form
columns + 1); default k = ceil(m / 2) of the projected dimension m.

``--find-k [--low L --high H]`` runs the campaign's k search (:mod:`calib.sweep.search`) on this
one instance instead: at each k, trials (replicates 0, 1, ... of the campaign streams) are added
until the anytime confidence bound decides the k against the target rate 1 - ``--delta``, at most
``--max-trials`` per k, with bracket-then-bisection between L (default 1) and H (default m); it
prints the trace (k, trials, successes, bounds) and the verdict. One retrieval is searched: the
first ``--retrieval``, else the kind's default.
"""

from __future__ import annotations

import argparse
import json
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from calib.checks import is_real
from calib.errors import InputError
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
MPS_SUFFIXES = (".mps", ".mps.gz")
#: closing line of every probe: what the numbers are and are not
NOTICE_LINE = ("These are measurements on this instance and machine, not a proof; end-to-end times vary between runs.")


def register(subparsers) -> None:
    from calib.commands.tables import add_predicate_options
    from calib.theory import RULES

    parser = subparsers.add_parser(
        "probe", help="project one instance at one k and show what comes back",
        description="Solve one instance (an MPS file, a saved instance or a family with parameters), project it at "
                    "one k for a few replicates, solve, retrieve, and print every metric per replicate and their "
                    "summary: what would happen to this model at this k.")
    parser.add_argument("target", metavar="INSTANCE_OR_FAMILY",
                        help="an MPS file (.mps, .mps.gz), a saved instance (STEM.json) or a family name (`calib families`)")
    parser.add_argument("--param", action="append", default=[], metavar="KEY=VALUE",
                        help="family parameter (repeatable), e.g. --param rows=200 --param cols=400")
    parser.add_argument("--projector", default="gaussian", help="projector family (default gaussian)")
    parser.add_argument("--projector-opt", action="append", default=[], metavar="KEY=VALUE",
                        help="projector option (repeatable), e.g. --projector-opt s=4")
    size = parser.add_mutually_exclusive_group()
    size.add_argument("--k", type=k_list, nargs="+", metavar="K",
                      help="projected size k, or several (--k 20 40, or --k 20,40): one block per k (default: half the "
                           "projected dimension, rounded up)")
    size.add_argument("--find-k", action="store_true",
                      help="search for the smallest k meeting the target rate 1 - --delta at --confidence (trace and verdict)")
    size.add_argument("--eps", type=float, help="distortion eps in (0, 1): k from the bound named by --rule")
    parser.add_argument("--rule", default="dasgupta-gupta", choices=sorted(RULES), help="bound used with --eps (default dasgupta-gupta)")
    parser.add_argument("--retrieval", action="append", metavar="R",
                        help="retrieval method (repeatable; default: every retrieval of the problem kind)")
    parser.add_argument("--replicates", type=int, default=5, help="independent projector draws (default 5)")
    parser.add_argument("--low", type=int, help="with --find-k: the smallest k searched (default 1)")
    parser.add_argument("--high", type=int, help="with --find-k: the largest k searched (default: the projected dimension)")
    parser.add_argument("--max-trials", type=int, default=300, metavar="N",
                        help="with --find-k: most trials at one k before it counts as not reaching the target (default 300)")
    parser.add_argument("--seed", type=int, default=0, help="root seed (default 0)")
    parser.add_argument("--time-limit", type=float, default=60.0, metavar="SECONDS", help="per solve (default 60)")
    parser.add_argument("--json", type=Path, metavar="FILE", help="also write the records and summary as JSON")
    add_predicate_options(parser)
    parser.set_defaults(func=run)


@dataclass
class Target:
    """One probed instance: its problem, kind, label and the identity its random streams derive from."""

    label: str
    kind: str
    problem: Any
    ref: Any  # calib.trial.InstanceRef
    n_points: int


def parse_assignments(items: list[str], where: str) -> dict:
    """``["a=1", "b=x"]`` -> ``{"a": 1, "b": "x"}``; values read as TOML literals, else as text.

    >>> parse_assignments(["rows=20", "density=0.5", "cost=nonnegative", "flag=true"], "--param")
    {'rows': 20, 'density': 0.5, 'cost': 'nonnegative', 'flag': True}
    """
    values = {}
    for item in items:
        key, sep, text = item.partition("=")
        if not sep or not key.strip():
            raise InputError(where, f"cannot read {item!r}", "write KEY=VALUE, e.g. rows=200")
        try:
            values[key.strip()] = tomllib.loads(f"v = {text.strip()}")["v"]
        except tomllib.TOMLDecodeError:
            values[key.strip()] = text.strip()
    return values


def resolve_target(args: argparse.Namespace) -> Target:
    """The instance named by ``args.target``, built deterministically (rules in the module docstring)."""
    from calib import families
    from calib.trial import InstanceRef

    path = Path(args.target)
    if args.target.lower().endswith(".json"):
        return _saved_target(path, args)
    if path.is_file() or args.target.lower().endswith(MPS_SUFFIXES):
        if not path.is_file():
            raise InputError(str(path), "no such MPS file", "check the path (an MPS file, a saved instance STEM.json or a family name)")
        if args.param:
            raise InputError("--param", "parameters apply to families, not to an MPS file", "drop --param")
        family, given, where = families.get("mps-dir"), {"dir": str(path.parent), "name": path.name}, str(path)
    elif args.target in families.REGISTRY:
        family, given, where = families.get(args.target), parse_assignments(args.param, "--param"), "--param"
    else:
        raise InputError("INSTANCE_OR_FAMILY", f"{args.target!r} is neither an existing file nor a family",
                         f"give an MPS file, a saved instance (.json) or one of {', '.join(sorted(families.REGISTRY))}")
    params = family.resolve(given, where)
    ref = InstanceRef(family.name, params, 0, args.seed)
    instance = ref.build()
    label = family.name + " " + " ".join(f"{key}={value}" for key, value in sorted(params.items()) if value is not None)
    return Target(label, instance.kind, instance.problem, ref, family.n_points(params))


def _saved_target(path: Path, args: argparse.Namespace) -> Target:
    """A saved instance (:func:`calib.instance_io.load_instance`); streams of its family, params and index."""
    from calib import families
    from calib.instance_io import load_instance
    from calib.trial import InstanceRef

    if args.param:
        raise InputError("--param", "parameters apply to families, not to a saved instance", "drop --param")
    instance, _ = load_instance(path)
    family = families.get(instance.family, f"{path}: family")
    params = family.resolve(instance.params, f"{path}: params")
    ref = InstanceRef(instance.family, params, instance.index, args.seed)
    n_points = family.n_points(params)
    return Target(f"{path} ({instance.family} #{instance.index})", instance.kind, instance.problem, ref, n_points)


def k_list(text: str) -> list[int]:
    """``"20,40"`` -> ``[20, 40]`` (argparse type of ``--k``; a bad item is an argparse usage error).

    >>> k_list("20, 40"), k_list("12")
    ([20, 40], [12])
    """
    try:
        values = [int(item) for item in text.split(",") if item.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"cannot read {text!r}: give integers, e.g. --k 20 or --k 20,40") from None
    if not values:
        raise argparse.ArgumentTypeError("give at least one k, e.g. --k 20")
    return list(dict.fromkeys(values))


def given_ks(values) -> list[int]:
    """The k values of ``--k`` (each item a :func:`k_list`), in order, without repeats.

    >>> given_ks([[10], [20, 10], [40]])
    [10, 20, 40]
    """
    return list(dict.fromkeys(k for item in values for k in item))


def choose_ks(args: argparse.Namespace, m: int, n_points: int) -> list[tuple[int, str]]:
    """[(k, how it was chosen)], one per k of ``--k`` (or the single k of :func:`choose_k`)."""
    if not args.k:
        return [choose_k(args, m, n_points)]
    chosen = []
    for k in given_ks(args.k):
        if not 1 <= k <= m:
            raise InputError("--k", f"must lie in 1..{m} (the projected dimension), got {k}", f"pick k between 1 and {m}")
        chosen.append((k, "given"))
    return chosen


def choose_k(args: argparse.Namespace, m: int, n_points: int) -> tuple[int, str]:
    """(k, how it was chosen); InputError when k is not in 1..m."""
    from calib.theory import check_eps, k_from_eps

    if args.eps is not None:
        check_eps(args.eps, "--eps")
        k = k_from_eps(args.rule, n_points, args.eps)
        source = f"eps = {args.eps} by {args.rule} with {n_points} points"
        if k > m:
            raise InputError("--eps", f"{source} gives k = {k}, above the projected dimension m = {m}",
                             "raise --eps or give --k directly")
        return k, source
    return math.ceil(m / 2), "default: half the projected dimension"


def _check_retrievals(args: argparse.Namespace, kind: str) -> list[str]:
    from calib.reduce import HANDLERS

    known = list(HANDLERS[kind].retrievals)
    for name in args.retrieval or []:
        if name not in known:
            raise InputError("--retrieval", f"{name!r} is not a retrieval of {kind} problems", f"choose from {', '.join(known)}")
    return list(dict.fromkeys(args.retrieval)) if args.retrieval else known


def run(args: argparse.Namespace) -> int:
    from calib.outputs import check_target, write_file
    from calib.reduce import HANDLERS
    from calib.solvers.methods import baseline_info
    from calib.trial import Trial, run_trial

    _check_numbers(args)
    check_target(args.json, "--json")
    choice = _projector_choice(args)
    target = resolve_target(args)
    predicate, confidence = _predicate(args, {"points": "distortion", "clustering": "clustering"}.get(target.kind, "usable"))
    handler = HANDLERS[target.kind]
    retrievals = _check_retrievals(args, target.kind)
    m = handler.projected_dim(target.problem)
    solver = {"time_limit_s": float(args.time_limit)}
    if not args.find_k and (args.low is not None or args.high is not None):
        raise InputError("--low/--high", "only bound a --find-k search", "add --find-k, or drop --low/--high")
    if args.find_k:
        return find_k(args, target, choice, retrievals, m, solver, predicate, confidence)
    chosen = choose_ks(args, m, target.n_points)
    for k, _ in chosen:
        _check_projector(choice, k, m)
    baseline = handler.solve_baseline(target.problem, solver)
    original = baseline.result
    payloads = []
    for k, k_label in chosen:
        records = []
        for replicate in range(args.replicates):
            rows = run_trial(Trial(target.ref, choice, k, replicate), target.problem, target.kind, original, retrievals, solver,
                             baseline_info(baseline))
            records += [{"replicate": replicate, "retrieval": name, **row} for name, row in zip(retrievals, rows)]
        summary = summarise(records, target.kind, predicate, confidence)
        print(("\n" if payloads else "") + render(target, original, choice, k, k_label, m, records, summary, predicate, confidence,
                                                           baseline))
        payloads.append({"target": target.label, "kind": target.kind, "projector": choice.label, "k": k, "k_label": k_label,
                         "projected_dim": m, "seed": args.seed, "predicate": predicate.as_dict(), "records": records,
                         "baseline": {"method": baseline.fastest, "seconds": baseline.seconds,
                                      "methods": baseline.summary()},
                         "summary": summary})
    if args.json is not None:
        payload = payloads[0] if len(payloads) == 1 else {"runs": payloads}
        write_file(args.json, json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n", "--json")
        print(f"wrote {args.json}")
    return 0


def find_k(args: argparse.Namespace, target: Target, choice, retrievals: list[str], m: int, solver: dict,
           predicate, confidence) -> int:
    """``--find-k``: the k search of a campaign on this one instance; prints the trace and the verdict."""
    from calib.analysis.tables import NOTICE
    from calib.commands.run import target_text
    from calib.reduce import HANDLERS
    from calib.sweep.search import KSearch, trace_lines

    low, high = _search_range(args, m)
    _check_projector(choice, low, m)
    retrieval = (args.retrieval or [HANDLERS[target.kind].default_retrieval])[0]
    original = HANDLERS[target.kind].solve_original(target.problem, solver)
    search = KSearch(low, high, confidence.target, confidence.level, args.max_trials)
    outcomes: dict[int, list] = {}
    while (demand := search.demand()) is not None:
        k, count = demand
        done = outcomes.setdefault(k, [])
        for replicate in range(len(done), count):
            done.append(_trial_success(target, choice, k, replicate, original, retrieval, solver, predicate))
        search.offer(done[:count])
    objective = f", objective {_objective(original.objective)}" if original.ok else ""
    lines = [f"probe --find-k: {target.label} ({target.kind}; projected dimension m = {m}, n = {target.n_points} points)",
             f"  n and m: {counting(target.kind)}",
             f"original: {original.status}{objective}",
             f"projector {choice.label}, retrieval {retrieval}, k in [{low}, {high}], at most {args.max_trials} trials per k",
             f"target: success rate >= {confidence.target:g} under {target_text(predicate)}"]
    lines += trace_lines(search, f"success rate >= {confidence.target:g}")
    lines += [f"trials run: {search.trials_read} (seed {args.seed}: the streams of a campaign with root_seed = {args.seed})", NOTICE]
    print(fold(lines))
    if args.json is not None:
        from calib.outputs import write_file

        payload = {"target": target.label, "kind": target.kind, "projector": choice.label, "retrieval": retrieval,
                   "low": low, "high": high, "seed": args.seed, "predicate": predicate.as_dict(),
                   "rate": confidence.target, "confidence": confidence.level, "safe_k": search.safe_k,
                   "reason": search.reason, "steps": [vars(step) for step in search.steps]}
        write_file(args.json, json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n", "--json")
        print(f"wrote {args.json}")
    return 0


def _search_range(args: argparse.Namespace, m: int) -> tuple[int, int]:
    if args.k is not None or args.eps is not None:
        raise InputError("--find-k", "searches k itself", "drop --k/--eps, or use --low and --high to bound the search")
    low = 1 if args.low is None else args.low
    high = m if args.high is None else args.high
    if not 1 <= low < high <= m:
        raise InputError("--low/--high", f"need 1 <= low < high <= {m} (the projected dimension), got {low} and {high}",
                         f"e.g. --low 1 --high {m}")
    if args.max_trials < 1:
        raise InputError("--max-trials", f"must be at least 1, got {args.max_trials}", "e.g. --max-trials 300")
    return low, high


def _trial_success(target: Target, choice, k: int, replicate: int, original, retrieval: str, solver: dict, predicate) -> bool:
    """Success of one campaign trial under ``predicate``; a trial that raises counts as a failure, as in a campaign."""
    import pandas as pd

    from calib.trial import Trial, run_trial
    from calib.verdicts.success import evaluate

    try:
        (record,) = run_trial(Trial(target.ref, choice, k, replicate), target.problem, target.kind, original, [retrieval], solver)
    except Exception:  # noqa: BLE001 - stored as an "error" row by a campaign, a failure either way
        return False
    return bool(evaluate(pd.DataFrame.from_records([record]).assign(status="ok", kind=target.kind), predicate).iloc[0])


def _check_numbers(args: argparse.Namespace) -> None:
    if args.replicates < 1:
        raise InputError("--replicates", f"must be at least 1, got {args.replicates}", "e.g. --replicates 5")
    if args.seed < 0:
        raise InputError("--seed", f"must be a non-negative integer, got {args.seed}", "e.g. --seed 0")
    if not (math.isfinite(args.time_limit) and args.time_limit > 0):
        raise InputError("--time-limit", f"must be a positive number of seconds, got {args.time_limit}", "e.g. --time-limit 60")


def _projector_choice(args: argparse.Namespace):
    from calib import projectors
    from calib.trial import ProjectorChoice

    projectors.check_name(args.projector, "--projector")
    options = parse_assignments(args.projector_opt, "--projector-opt")
    return ProjectorChoice(args.projector, tuple(sorted(options.items())))


def _check_projector(choice, k: int, m: int) -> None:
    """Draw the projector once so that options it does not take fail here, naming the option."""
    from calib import projectors

    try:
        projectors.make(choice.name, k, m, 0, **dict(choice.options))
    except TypeError as error:
        raise InputError("--projector-opt", str(error), f"check the options of projector {choice.name!r}") from None


def _predicate(args: argparse.Namespace, default_preset: str):
    from calib.commands.tables import predicate_from

    for value in (args.confidence, args.delta):
        if value is not None and not 0.0 < value < 1.0:
            raise InputError("--confidence/--delta", "must lie in (0, 1)", "e.g. --confidence 0.95 --delta 0.1")
    return predicate_from(args, default_preset)


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
    import pandas as pd

    from calib.verdicts.stats import clopper_pearson_lower
    from calib.verdicts.success import evaluate, saves_time

    first = [row for row in records if row["retrieval"] == records[0]["retrieval"]]
    statuses: dict = {}
    for row in first:
        statuses[str(row["proj_status"])] = statuses.get(str(row["proj_status"]), 0) + 1
    frame = pd.DataFrame.from_records(records).assign(status="ok", kind=kind)
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


#: printed with :func:`_objective`: an optimum is only of use with its digits
OBJECTIVES = ("orig_objective", "proj_objective")


def _objective(value) -> str:
    """An objective value with 12 significant digits.

    >>> _objective(-2331389.8243), _objective(7.0), _objective(None)
    ('-2331389.8243', '7', 'None')
    """
    return str(value) if value is None else f"{float(value):.12g}"


def _field(field: str, value) -> str:
    return _objective(value) if field in OBJECTIVES else _fmt(value)


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


def verdict_lines(target: Target, k: int, summary: dict, predicate, confidence) -> list[str]:
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


def render(target: Target, original, choice, k: int, k_label: str, m: int, records: list[dict], summary: dict,
           predicate, confidence, baseline=None) -> str:
    """The human-readable report of a probe: what was probed, the verdict, the summary, then every replicate."""
    objective = f", objective {_objective(original.objective)}" if original.ok else ""
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
