"""``calib rerun STORE TRIAL_ID``: re-run one stored trial alone and compare with the store."""

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
    parser.add_argument("trial_id", help="the trial_id column of `calib export` (a unique prefix of 6+ characters is enough)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.store.database import Store
    from calib.sweep.rerun import rerun

    store = Store.open_existing(args.store)
    try:
        comparison = rerun(store, args.trial_id)
    finally:
        store.close()
    print(comparison.render())
    return 0 if comparison.identical else 1
