"""``calib run SPEC``: run (or resume) the campaign a sweep spec describes."""

from __future__ import annotations

import argparse
import sys


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "run", help="run or resume the campaign of a sweep spec",
        description="Run every trial of a TOML sweep spec that its store does not hold yet. Re-running the same "
                    "spec resumes; a different spec under the same campaign name is refused.")
    parser.add_argument("spec", help="path to the TOML sweep spec (see instances/quickstart.toml)")
    parser.add_argument("--out", default="results", metavar="DIR",
                        help="output folder; the store is DIR/<campaign name>.sqlite (default: results)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec

    spec = load_spec(args.spec)
    bar = None
    if not args.quiet:
        from tqdm import tqdm

        bar = tqdm(unit="trial", file=sys.stderr, dynamic_ncols=True, desc=spec.name, mininterval=0.5)

    def progress(done: int, total: int) -> None:
        bar.total = total
        bar.update(done - bar.n)

    try:
        summary = run_campaign(spec, args.out, progress=progress if bar is not None else None)
    finally:
        if bar is not None:
            bar.close()
    print(f"store: {summary.store_path}")
    print(f"trials: {summary.planned} planned, {summary.skipped} already stored, {summary.ran} run "
          f"({summary.failed} failed) in {summary.seconds:.1f} s")
    return 0
