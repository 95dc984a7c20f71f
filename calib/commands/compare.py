"""``calib compare STORE``: paired projector comparisons on the same instances, with intervals.

    calib compare results/quickstart/quickstart.sqlite [--projectors srht countsketch gaussian]
        [--reference gaussian | --all-pairs] [--preset ...] [--resamples 1000] [--json FILE]

prints one verdict line per (group, pair) and writes the full comparison as JSON (schema
``calib/schemas/projector-comparison.v1.json``); the method is in :mod:`calib.analysis.compare`.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from calib.commands import options


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "compare", help="compare projectors paired on the same instances (k50, safe k, cost, verdict)",
        description="For every family, size and retrieval of the store, compare projectors on the instances they "
                    "share: the k50 ratio and safe-k difference with bootstrap intervals over instances, a sign-flip "
                    "permutation test over instances, exact McNemar tests at each k, the sketch and end-to-end time "
                    "ratios, and a one-line verdict.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    parser.add_argument("--projectors", nargs="+", metavar="NAME", help="compare only these projectors (default: all stored)")
    pairs = parser.add_mutually_exclusive_group()
    pairs.add_argument("--reference", default="gaussian", metavar="NAME",
                       help="compare every other projector against this one (default gaussian)")
    pairs.add_argument("--all-pairs", action="store_true", help="compare every pair of projectors")
    parser.add_argument("--resamples", type=int, default=1000, help="bootstrap resamples over instances (default 1000)")
    parser.add_argument("--json", type=Path, metavar="FILE", help="write the comparison as JSON")
    options.add_predicate_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.compare import Settings, build_comparison, verdict_lines
    from calib.analysis.campaign import store_defaults
    from calib.analysis.records import Comparison
    from calib.analysis.rows import load_rows
    from calib.analysis.tablefile import dumps
    from calib.errors import InputError
    from calib.outputs import check_target, write_file
    from calib.store.database import Store

    if args.resamples < 100:
        raise InputError("--resamples", f"must be at least 100, got {args.resamples}", "e.g. --resamples 1000")
    if args.json is not None:
        check_target(args.json, "--json")
    store = Store.open_existing(args.store)
    try:
        rows = load_rows(store)
        if rows.empty:
            raise InputError(str(store.path), "the store has no trial rows yet", "run `calib run SPEC` first")
        default, stated, _ = store_defaults(store, rows)  # a predicate that decides something on every kind
        predicate, confidence = options.predicate_options(args).resolve(default, stated)
        stored = set(rows["projector"])
        for name in (args.projectors or []) + ([] if args.all_pairs else [args.reference]):
            if name not in stored:
                raise InputError("--projectors" if name != args.reference else "--reference",
                                 f"projector {name!r} has no trials in this store",
                                 f"choose among {', '.join(sorted(stored))}")
        settings = Settings(confidence, resamples=args.resamples, root_seed=store.meta_int("root_seed", 0))
        document = build_comparison(store, rows, predicate, settings, args.projectors,
                                    None if args.all_pairs else args.reference, args.all_pairs)
    finally:
        store.close()
    if not document["groups"]:
        raise InputError(str(args.store), "no group holds two of the chosen projectors on shared instances",
                         "sweep at least two projectors over the same instances")
    from calib.wording import fold

    typed = Comparison.from_dict(document)
    print(fold(verdict_lines(typed) + [typed.notice]))
    if args.json is not None:
        write_file(args.json, dumps(document), "--json")
        print(f"wrote {args.json}")
    return 0
