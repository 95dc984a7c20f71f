"""``calib rerun STORE TRIAL_ID`` or ``calib rerun STORE --sample CELLS``: re-run stored trials alone and
compare with the store (one trial, or a stated sample of one trial in each of CELLS cells)."""

from __future__ import annotations

import argparse


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "rerun", help="re-run one stored trial and compare its numbers with the stored ones",
        description="Rebuild one trial from its stored identity (instance, projector, k, replicate, root seed, "
                    "solver options), solve its original again and run the trial in a fresh worker process, then "
                    "print stored and fresh values side by side. Everything but timings must be equal: the exit "
                    "code is 0 when it is, 1 when some value differs.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    which = parser.add_mutually_exclusive_group(required=True)
    which.add_argument("trial_id", nargs="?", help="the trial_id column of `calib export` (a unique prefix of 6+ "
                       "characters is enough)")
    which.add_argument("--sample", type=_cells, metavar="CELLS", help="re-run one trial in each of CELLS cells "
                       "(family, size, projector) picked by --seed: a stated sample of the whole store")
    parser.add_argument("--seed", type=int, default=0, help="the seed that picks the sample's cells and trials (default 0)")
    parser.set_defaults(func=run)


def _cells(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"--sample {text!r}: give a whole number of cells >= 1")
    return value


def run(args: argparse.Namespace) -> int:
    from calib.store.database import Store
    from calib.sweep.rerun import rerun, rerun_sample

    store = Store.open_existing(args.store)
    try:
        comparisons = rerun_sample(store, args.sample, args.seed) if args.sample else [rerun(store, args.trial_id)]
    finally:
        store.close()
    print("\n\n".join(comparison.render() for comparison in comparisons))
    if args.sample:
        same = sum(comparison.identical for comparison in comparisons)
        print(f"\nsample of {len(comparisons)} cell(s) (seed {args.seed}): {same} identical, {len(comparisons) - same} differ")
    return 0 if all(comparison.identical for comparison in comparisons) else 1
