"""``calib tables STORE``: safe-k tables (JSON/CSV) from a campaign store, timings apart."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import TYPE_CHECKING

from calib.commands import options
from calib.wording import fold, wrapped

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, Law, LawClass, SafeKTable, SweptRule, Transition


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
    parser.add_argument("--html", type=Path, metavar="FILE",
                        help="also write the HTML report (as `calib report`) from this same analysis, so the report and "
                             "the table agree")
    parser.add_argument("--rule", type=Path, metavar="FILE",
                        help="write the certified rule per class (k = f m, k = a + C ln n, scope, confidence, the size and "
                             "feature ranges it holds for) as JSON for pipelines (schema: calib/schemas/k-rule.v1.json); "
                             "`calib.atlas.rule_k(FILE, ...)` answers a new model from it")
    options.add_analysis_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.campaign import analyse_store
    from calib.analysis.records import SafeKTable
    from calib.analysis.tables import strip_policy, write_table
    from calib.commands.searches import replay_stored
    from calib.analysis.timing import timing_frame, write_timings
    from calib.outputs import check_target

    for path, option in ((args.json, "--json"), (args.csv, "--csv"), (args.timings, "--timings"), (args.html, "--html"),
                         (args.rule, "--rule")):
        check_target(path, option)
    # one analysis for the table and the report: the report needs the policy answer, the table holds it
    # only when asked (it rests on measured times)
    keywords = options.analysis_keywords(args)
    keywords["policy"] |= args.html is not None
    table, rows, spec, searched = analyse_store(args.store, options.predicate_options(args), replay=replay_stored,
                                                **keywords)
    timings = timing_frame(rows, table["analyses"][0])
    written = table if args.policy else strip_policy(table)
    write_table(written, args.json, args.csv)
    if args.timings is not None:
        write_timings(timings, args.timings)
    if args.html is not None:
        from calib.analysis.report import build_report
        from calib.outputs import write_file

        write_file(args.html, build_report(SafeKTable.from_dict(table), timings, spec), "--html")
    if args.rule is not None:
        from calib.analysis.rulefile import write_rules

        write_rules(written, args.rule)
    print(render_summary(SafeKTable.from_dict(written), timings))
    if searched is not None:
        print(search_summary(*searched))
    for path in (args.json, args.csv, args.timings, args.html, args.rule):
        if path is not None:
            print(f"wrote {path}")
    return 0


def search_summary(spec, cells) -> str:
    """For a store written by a k search: the k values above are the ones the search tested, and its own
    verdicts (replayed from the stored trials under the spec's [target]) follow."""
    from calib.commands.searches import search_report

    return "\n" + fold(["the k values above are those a k search tested (counts per tested k); the table states the "
                        "search's own claims under its [target]; the search itself, replayed from the stored trials:"]
                       + search_report(spec, cells).splitlines())


def _transition_text(transition: Transition, rate: float) -> str:
    if transition.k50 is None:
        return f"no logistic fit: {transition.reason}"
    low, high = transition.k50_interval
    return (f"logistic fit: k50 = {transition.k50:.3g} [{low:.3g}, {high:.3g}]; it reaches {rate:.0%} success at "
            f"k = {transition.k_target:.3g} (the fit's point estimate, no confidence claim: the safe k above is the "
            f"certified answer); intervals for {transition.interval_scope}")


def _fit_text(name: str, fit: Law, eps: str = "") -> str:
    from calib.analysis.law import law_formula

    censored = f"; {fit.censored} censored size(s) not fitted" if fit.censored else ""
    if fit.a is None:
        return f"{name} law: {fit.reason}"
    return (f"{name} law: {law_formula(fit.a, fit.C, fit.C_se)} over n in [{fit.n_min}, {fit.n_max}]"
            f"{censored}{eps}")


def _law_lines(law: LawClass) -> list[str]:
    rules = ", ".join(f"{name} C = {rule.C:.4g}" for name, rule in law.theory.rules.items())
    eps = f" (bounds at eps = {law.theory.eps:g}: {rules})" if law.theory.eps is not None else ""
    lines = []
    for text in (_fit_text("class safe k", law.class_safe_k_law),
                 _fit_text("safe k (these instances)", law.safe_k_law, eps), _fit_text("k50", law.k50_law)):
        lines += wrapped(text, "  ")
    rule = law.policy_rule
    if rule and rule.grid and not law.rules:  # else said at both scopes below
        lines += wrapped(f"policy rule {rule.rule}: {rule.statement}", "  ")
        if rule.failing:
            lines += wrapped(f"{rule.unit}s below the target at f = {rule.failing_at:g}: {', '.join(rule.failing)}",
                             "    ")
    for swept in law.rules or []:
        lines += swept_rule_lines(swept)
    return lines


def swept_rule_lines(swept: SweptRule) -> list[str]:
    """The rule of the swept grid at both scopes: these units, then the class."""
    mine, klass = swept.instances, swept.class_
    lines = wrapped(f"rule {swept.rule}, these {mine.units} {swept.unit}s: {mine.statement}", "  ")
    lines += wrapped(f"{mine.trials_per_unit} trials per {swept.unit} at each value; "
                     f"{mine.trials_per_unit_needed} needed when all succeed (set replicates)", "    ")
    if mine.value is None and mine.failing:
        lines += wrapped(f"{swept.unit}s below the target at {swept.coefficient} = {mine.failing_at:g}: "
                         f"{', '.join(mine.failing)}", "    ")
    lines += wrapped(f"rule {swept.rule}, the class: {klass.statement or klass.reason}", "  ")
    return lines


def _k_text(k, m: int) -> str:
    if k is None:
        return "none"
    return f"{k} (k = m: no reduction)" if k >= m else f"{k} (k/m = {k / m:.2f})"


def scope_lines(entry: Entry) -> list[str]:
    """The class answer first (the default), then the answer for the instances measured."""
    klass, m = entry.class_, entry.projected_dim
    return [f"class safe k = {_k_text(klass.safe_k, m)}" + (f"  [{klass.reason}]" if klass.reason else ""),
            f"for these {entry.instances} instance(s) only: safe k = {_k_text(entry.safe_k, m)}"
            + (f"  [{entry.safe_k_reason}]" if entry.safe_k_reason else "")]


def ladder_note(table: SafeKTable, analysis: Analysis) -> str:
    """Whether the other tolerances of the ladder give the same class answers as ``analysis``."""
    others = [other for other in table.analyses if other is not analysis and other.tau is not None]
    if not others:
        return ""

    def answers(item: Analysis) -> dict:
        return {(e.family, e.size, json.dumps(e.params, sort_keys=True), e.projector, e.retrieval):
                e.class_.safe_k for e in item.entries}

    mine = answers(analysis)
    parts = []
    for other in others:
        differ = sum(mine.get(key, "missing") != value for key, value in answers(other).items())
        parts.append(f"tau = {other.tau:g}: " + ("the same class safe k in every cell" if not differ else
                                                   f"{differ} cell(s) differ (blocks below)"))
    return "At the other tolerances of the ladder: " + "; ".join(parts) + "."


def render_summary(table: SafeKTable, timings=None) -> str:
    """A plain-text view: the one-screen answer (:mod:`calib.analysis.summary`) of the first (strictest)
    analysis, then per tolerance one block per cell (sizes in numeric order, one line per k) and the laws."""
    from calib.analysis.policy import policy_text
    from calib.analysis.summary import entry_order, summary_text
    from calib.analysis.tables import class_labels

    target = table.target
    first = table.analyses[0]
    lines = [f"campaign {table.campaign.name}: target rate {target.success_rate:.2f} at "
             f"{target.confidence:.0%} confidence", ""]
    if first.entries:
        lines.append(summary_text(table, first, timings, class_labels(first)))
        lines += wrapped(ladder_note(table, first), "", "")
    lines.append("")
    lines += wrapped("The details follow: per tolerance, one block per cell (its answer in both scopes, the fit and "
                     "every tested k), then the laws across sizes.", "", "")
    for analysis in table.analyses:
        lines.append(f"\n=== predicate {analysis.predicate.name} (tau = {analysis.tau})")
        for excluded in analysis.excluded:
            lines += wrapped(f"left out {excluded.family}: {excluded.reason}", "  ")
        label = class_labels(analysis)
        for entry in sorted(analysis.entries, key=lambda item: entry_order(item, label(item))):
            extra = label(entry)
            lines.append("")
            lines += wrapped(f"{entry.family} {entry.size}{' ' + extra if extra else ''} | {entry.projector} | "
                             f"{entry.retrieval} | m={entry.projected_dim} n={entry.n_points}, "
                             f"{entry.instances} instance(s)", "")
            for text in scope_lines(entry) + [_transition_text(entry.transition, target.success_rate)]:
                lines += wrapped(text)
            if entry.policy:
                lines += wrapped(policy_text(entry))
            if entry.solver_errors:
                lines += wrapped(f"{entry.solver_errors} projected solve(s) ended in a solver error: "
                                 + ("left out of the rates" if target.solver_errors == "exclude" else "counted as failures"))
            for point in entry.grid:
                mark = "pass" if point.passes else "fail"
                klass = "pass" if point.class_passes else "fail"
                lines.append(f"   k={point.k:>6}  {point.successes:>4}/{point.trials:<4} rate={point.rate:.3f}"
                             f"  lower={point.lower_bound:.3f} {mark}  class lower={point.class_lower_bound:.3f} {klass}"
                             + (f"  solver errors {point.solver_errors}" if point.solver_errors else ""))
        for law in analysis.laws:
            extra = label(law)
            lines.append(f"\n{law.family}{' ' + extra if extra else ''} | {law.projector} | {law.retrieval}")
            lines += _law_lines(law)
    lines.append("")
    lines += wrapped(table.notice, "", "")
    return "\n".join(lines)
