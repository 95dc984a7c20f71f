"""``calib tables STORE``: safe-k tables (JSON/CSV) from a campaign store."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_predicate_options(parser: argparse.ArgumentParser) -> None:
    """Options that choose the success predicate and the confidence target (shared by commands)."""
    group = parser.add_argument_group("success predicate (decided now, from stored metrics; no re-run needed)")
    group.add_argument("--preset", default="bound", choices=["bound", "solution"],
                       help="'bound': the projected optimum is within --tol-gap of the original (default); "
                            "'solution': the retrieved point meets --tol-obj, --tol-feas and --tol-sign")
    group.add_argument("--tol-gap", type=float, metavar="TAU", help="relative gap of the projected optimum (bound preset: 0.05)")
    group.add_argument("--tol-obj", type=float, metavar="TAU", help="relative objective error of the retrieved point (solution preset: 0.05)")
    group.add_argument("--tol-feas", type=float, metavar="TAU", help="relative feasibility error ||Ax-b||/max(1,||b||) (solution preset: 0.05)")
    group.add_argument("--tol-sign", type=float, metavar="TAU", help="relative sign violation ||min(x,0)||/max(1,||x||) (solution preset: 0.05)")
    group.add_argument("--tol-distortion", type=float, metavar="TAU", help="worst pairwise distortion for point sets")
    group.add_argument("--delta", type=float, default=0.1, help="target success rate is 1 - delta (default 0.1)")
    group.add_argument("--confidence", type=float, default=0.95, help="confidence of the lower bound (default 0.95)")


def predicate_from(args: argparse.Namespace):
    from calib.analysis.success import make_predicate
    from calib.analysis.tables import Confidence

    predicate = make_predicate(args.preset, gap=args.tol_gap, obj=args.tol_obj, feas=args.tol_feas,
                               sign=args.tol_sign, distortion=args.tol_distortion)
    return predicate, Confidence(delta=args.delta, level=args.confidence)


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "tables", help="write safe-k tables from a store",
        description="Decide success from the stored metrics with the chosen tolerances, then write per "
                    "(family, size, projector, retrieval) the success rate, its one-sided Clopper-Pearson lower "
                    "bound at each k, and the safe k. Prints a summary; writes JSON and/or CSV when asked.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    parser.add_argument("--json", type=Path, metavar="FILE", help="write the table as JSON")
    parser.add_argument("--csv", type=Path, metavar="FILE", help="write the table as CSV (one line per cell and k)")
    add_predicate_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.tables import build_table, write_table
    from calib.sweep.store import Store

    predicate, confidence = predicate_from(args)
    store = Store.open_existing(args.store)
    try:
        table = build_table(store, predicate, confidence)
    finally:
        store.close()
    write_table(table, args.json, args.csv)
    print(render_summary(table))
    for path in (args.json, args.csv):
        if path is not None:
            print(f"wrote {path}")
    return 0


def render_summary(table: dict) -> str:
    """A plain-text view: one block per cell, one line per k."""
    target = table["target"]
    lines = [f"campaign {table['campaign']['name']}: predicate {table['predicate']['name']}, "
             f"target rate {target['success_rate']:.2f} at {target['confidence']:.0%} confidence"]
    for entry in table["entries"]:
        safe = entry["safe_k"] if entry["safe_k"] is not None else "none"
        note = f"  [{entry['safe_k_reason']}]" if entry["safe_k_reason"] else ""
        lines.append(f"\n{entry['family']} {entry['size']} | {entry['projector']} | {entry['retrieval']} | m={entry['projected_dim']}"
                     f" -> safe k = {safe}{note}")
        for point in entry["grid"]:
            mark = "pass" if point["passes"] else "fail"
            lines.append(f"   k={point['k']:>6}  {point['successes']:>4}/{point['trials']:<4} rate={point['rate']:.3f}"
                         f"  lower={point['lower_bound']:.3f}  {mark}")
    lines.append("\n" + table["notice"])
    return "\n".join(lines)
