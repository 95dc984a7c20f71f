"""``calib tables STORE``: safe-k tables (JSON/CSV) from a campaign store, timings apart."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_predicate_options(parser: argparse.ArgumentParser) -> None:
    """Options that choose the success predicate and the confidence target (shared with `probe`)."""
    from calib.analysis.success import PRESETS

    group = parser.add_argument_group("success predicate (decided now, from stored metrics; no re-run needed)")
    group.add_argument("--preset", default=None, choices=sorted(PRESETS) + ["solution"],
                       help="'usable' (default; `probe` of a point set defaults to 'distortion'): the verdict matches and "
                            "the point of each retrieval meets --max-obj-error, --max-infeasibility and --max-sign-violation; "
                            "'policy': usable and faster end to end than the original solved by its fastest method; "
                            "'bound': the projected optimum is within --max-gap of the original; "
                            "'classify': only the feasibility verdict must match; "
                            "'distortion': point sets, worst pairwise distortion within --max-distortion; "
                            "'clustering': the projected partition's cost on the original points within 1 + "
                            "--max-cost-excess of the original partition's")
    group.add_argument("--faster", action="store_true",
                       help="on any preset: a trial also has to be faster end to end (sketch + projected solve + "
                            "retrieval) than the fair baseline; depends on measured times")
    group.add_argument("--max-gap", type=float, metavar="TAU", help="relative gap of the projected optimum (bound preset: 0.05)")
    group.add_argument("--max-obj-error", type=float, metavar="TAU", help="objective error of the retrieved point relative to the objective's scale (usable preset: 0.05)")
    group.add_argument("--max-infeasibility", type=float, metavar="TAU", help="feasibility error, e.g. ||Ax-b|| over the kind's scale (usable preset: 0.05)")
    group.add_argument("--max-sign-violation", type=float, metavar="TAU", help="cone violation ||min(x,0)||/||x|| or the PSD analogue (usable preset: 0.05)")
    group.add_argument("--max-distortion", type=float, metavar="TAU", help="worst pairwise distortion of squared distances for point sets (distortion preset: 0.2)")
    group.add_argument("--max-cost-excess", type=float, metavar="TAU", help="clustering: cluster_cost_ratio - 1 of the projected partition (clustering preset: 0.05)")
    group.add_argument("--delta", type=float, default=0.1, help="target success rate is 1 - delta (default 0.1)")
    group.add_argument("--confidence", type=float, default=0.95, help="confidence of the lower bound and the intervals (default 0.95)")


def add_analysis_options(parser: argparse.ArgumentParser) -> None:
    """The predicate options plus the tolerance ladder and the eps of the bounds (tables, report)."""
    add_predicate_options(parser)
    group = parser.add_argument_group("tolerance ladder and theory")
    group.add_argument("--tau", type=float, nargs="+", metavar="TAU",
                       help="a ladder of primary tolerances: one analysis per value, each setting the tolerance(s) of the preset "
                            "(e.g. --tau 0.01 0.05 0.1); `calib lookup --tau` then picks among them")
    group.add_argument("--policy", action="store_true",
                       help="add the policy answer per cell: the k with the smallest median end-to-end time among the k "
                            "where usable-and-faster trials reach the target, or 'no k saves time at this size' (rests on "
                            "measured times, so the table then differs between runs)")
    group.add_argument("--eps", type=float, help="eps at which the published JL bounds are compared for LPs/SDPs/QPs "
                                                 "(default: the primary tolerance tau; point sets always use the distortion tolerance)")
    group.add_argument("--solver-errors", default="exclude", metavar="{exclude,fail}",
                       help="projected solves that end in a solver error: 'exclude' counts them in their own column and "
                            "leaves them out of the rates (default); 'fail' counts them as failures (strict reading). "
                            "A time limit is always a failure")


def predicate_from(args: argparse.Namespace, default_preset: str = "usable"):
    """(predicate, confidence) from the parsed options; ``default_preset`` when --preset is not given."""
    from calib.analysis.success import make_predicate
    from calib.analysis.tables import Confidence

    predicate = make_predicate(args.preset or default_preset, faster=args.faster, gap=args.max_gap, obj=args.max_obj_error,
                               feas=args.max_infeasibility, sign=args.max_sign_violation, distortion=args.max_distortion,
                               cost=getattr(args, "max_cost_excess", None))
    return predicate, Confidence(delta=args.delta, level=args.confidence)


def analyse(args: argparse.Namespace, policy: bool = False):
    """(table, tidy rows, stored spec) of ``args.store`` under the parsed analysis options; the policy
    answer is added when ``policy`` or ``--policy`` asks for it."""
    from calib.analysis.tables import build_table, load_rows
    from calib.errors import InputError
    from calib.sweep.store import Store

    predicate, confidence = predicate_from(args)
    if args.eps is not None and not 0.0 < args.eps < 1.0:
        raise InputError("--eps", f"must lie in (0, 1), got {args.eps!r}", "e.g. --eps 0.2")
    store = Store.open_existing(args.store)
    try:
        rows = load_rows(store)
        table = build_table(store, predicate, confidence, taus=args.tau, eps=args.eps, rows=rows,
                            solver_errors=getattr(args, "solver_errors", "exclude"),
                            policy=policy or getattr(args, "policy", False))
        spec = store.stored_spec()
    finally:
        store.close()
    return table, rows, spec


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "tables", help="write safe-k tables from a store",
        description="Decide success from the stored metrics with the chosen tolerances, then write per "
                    "(family, size, projector, retrieval) the success rate with its one-sided Clopper-Pearson and "
                    "Wilson lower bounds at each k, the safe k, the logistic transition (k50, k at 1-delta), the law "
                    "k = a + C ln n across sizes and the published bounds beside them. Prints a summary; writes JSON "
                    "and/or CSV when asked. Timings go to their own file (--timings): they differ between runs, "
                    "the table does not.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    parser.add_argument("--json", type=Path, metavar="FILE", help="write the table as JSON (schema: calib/schemas/safe-k-table.v3.json)")
    parser.add_argument("--csv", type=Path, metavar="FILE", help="write the table as CSV (one line per tolerance, cell and k)")
    parser.add_argument("--timings", type=Path, metavar="FILE", help="write the median times and speed-ups per cell and k as CSV")
    add_analysis_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.tables import write_table
    from calib.analysis.timing import timing_frame, write_timings
    from calib.outputs import check_target

    for path, option in ((args.json, "--json"), (args.csv, "--csv"), (args.timings, "--timings")):
        check_target(path, option)
    table, rows, spec = analyse(args)
    write_table(table, args.json, args.csv)
    if args.timings is not None:
        write_timings(timing_frame(rows, table["analyses"][0]), args.timings)
    print(render_summary(table))
    searched = search_summary(args.store, spec)
    if searched:
        print(searched)
    for path in (args.json, args.csv, args.timings):
        if path is not None:
            print(f"wrote {path}")
    return 0


def search_summary(store_path, raw_spec: dict) -> str:
    """For a store written by a k search: the k values above are the ones the search tested, and its own
    verdicts (replayed from the stored trials under the spec's [target]) follow; "" otherwise."""
    from calib.commands.run import search_report
    from calib.errors import InputError
    from calib.sweep.runner import replay_searches
    from calib.sweep.spec import parse_spec
    from calib.sweep.store import Store

    k = raw_spec.get("sweep", {}).get("k")
    if not (isinstance(k, dict) and "search" in k):
        return ""
    try:
        spec = parse_spec(raw_spec, source=str(store_path))
    except InputError as error:
        return f"\n(this store's k values come from a k search; its verdicts cannot be replayed here: {error})"
    store = Store.open_existing(store_path)
    try:
        cells = replay_searches(spec, store)
    finally:
        store.close()
    return ("\nthe k values above are those a k search tested (counts per tested k); the search itself, "
            "replayed from the stored trials:\n" + search_report(spec, cells))


def _transition_text(transition: dict) -> str:
    if transition["k50"] is None:
        return f"no logistic fit: {transition['reason']}"
    low, high = transition["k50_interval"]
    return (f"k50 = {transition['k50']:.3g} [{low:.3g}, {high:.3g}], k at target = {transition['k_target']:.3g} "
            f"(intervals for {transition['interval_scope']})")


def _fit_text(name: str, fit: dict, eps: str = "") -> str:
    censored = f"; {fit['censored']} censored size(s) not fitted" if fit["censored"] else ""
    if fit["a"] is None:
        return f"  {name} law: {fit['reason']}"
    se = f" ± {fit['C_se']:.3g}" if fit["C_se"] is not None else ""
    return f"  {name} law: k = {fit['a']:.3g} + {fit['C']:.3g}{se} ln n over n in [{fit['n_min']}, {fit['n_max']}]{censored}{eps}"


def _law_text(law: dict) -> str:
    rules = ", ".join(f"{name} C = {rule['C']:.4g}" for name, rule in law["theory"]["rules"].items())
    eps = f" (bounds at eps = {law['theory']['eps']:g}: {rules})" if law["theory"]["eps"] is not None else ""
    lines = [_fit_text("class safe k", law["class_safe_k_law"]),
             _fit_text("safe k (these instances)", law["safe_k_law"], eps), _fit_text("k50", law["k50_law"])]
    rule = law.get("policy_rule")
    if rule and rule["grid"]:
        lines.append(f"  policy rule {rule['rule']}: {rule['statement']}")
        if rule["failing"]:
            lines.append(f"    {rule['unit']}s below the target at f = {rule['failing_at']:g}: {', '.join(rule['failing'])}")
    return "\n".join(lines)


def scope_lines(entry: dict) -> list[str]:
    """The class answer first (the default), then the answer for the instances measured."""
    klass = entry["class"]
    class_k = klass["safe_k"] if klass["safe_k"] is not None else "none"
    safe = entry["safe_k"] if entry["safe_k"] is not None else "none"
    return [f"class safe k = {class_k}" + (f"  [{klass['reason']}]" if klass["reason"] else ""),
            f"for these {entry['instances']} instance(s) only: safe k = {safe}"
            + (f"  [{entry['safe_k_reason']}]" if entry["safe_k_reason"] else "")]


def render_summary(table: dict) -> str:
    """A plain-text view: per tolerance, one block per cell (one line per k), then the laws."""
    from calib.analysis.policy import policy_text
    from calib.analysis.tables import class_labels

    target = table["target"]
    lines = [f"campaign {table['campaign']['name']}: target rate {target['success_rate']:.2f} at "
             f"{target['confidence']:.0%} confidence"]
    for analysis in table["analyses"]:
        lines.append(f"\n=== predicate {analysis['predicate']['name']} (tau = {analysis['tau']})")
        for excluded in analysis["excluded"]:
            lines.append(f"  left out {excluded['family']}: {excluded['reason']}")
        label = class_labels(analysis)
        for entry in analysis["entries"]:
            extra = label(entry)
            lines.append(f"\n{entry['family']} {entry['size']}{' ' + extra if extra else ''} | {entry['projector']} | {entry['retrieval']} | "
                         f"m={entry['projected_dim']} n={entry['n_points']}, {entry['instances']} instance(s)")
            lines += [f"   {line}" for line in scope_lines(entry)]
            lines.append(f"   {_transition_text(entry['transition'])}")
            if "policy" in entry:
                lines.append(f"   {policy_text(entry)}")
            if entry["solver_errors"]:
                lines.append(f"   {entry['solver_errors']} projected solve(s) ended in a solver error: "
                             + ("left out of the rates" if table["target"]["solver_errors"] == "exclude" else "counted as failures"))
            for point in entry["grid"]:
                mark = "pass" if point["passes"] else "fail"
                klass = "pass" if point["class_passes"] else "fail"
                lines.append(f"   k={point['k']:>6}  {point['successes']:>4}/{point['trials']:<4} rate={point['rate']:.3f}"
                             f"  lower={point['lower_bound']:.3f} {mark}  class lower={point['class_lower_bound']:.3f} {klass}"
                             + (f"  solver errors {point['solver_errors']}" if point["solver_errors"] else ""))
        for law in analysis["laws"]:
            extra = label(law)
            lines.append(f"\n{law['family']}{' ' + extra if extra else ''} | {law['projector']} | {law['retrieval']}")
            lines.append(_law_text(law))
    lines.append("\n" + table["notice"])
    return "\n".join(lines)
