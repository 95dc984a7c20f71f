"""``calib export STORE``: every stored trial row as CSV or Parquet, for other tools."""

from __future__ import annotations

import argparse
from pathlib import Path


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "export", help="write the raw trial rows of a store as CSV and/or Parquet",
        description="One line per (trial, retrieval) with the instance columns, every metric as its own column "
                    "(docs/spec.md lists them), the status and message, the stream key, root seed, solver options "
                    "and the package versions of the worker that produced it.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    parser.add_argument("--csv", type=Path, metavar="FILE", help="write CSV here")
    parser.add_argument("--parquet", type=Path, metavar="FILE", help="write Parquet here (needs pyarrow)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.export import export_frame, write_export
    from calib.errors import InputError
    from calib.outputs import check_target
    from calib.store.database import Store

    if args.csv is None and args.parquet is None:
        raise InputError("calib export", "no output chosen", "give --csv FILE and/or --parquet FILE")
    check_target(args.csv, "--csv")
    check_target(args.parquet, "--parquet")
    store = Store.open_existing(args.store)
    try:
        frame = export_frame(store)
    finally:
        store.close()
    write_export(frame, args.csv, args.parquet)
    for path in (args.csv, args.parquet):
        if path is not None:
            print(f"wrote {path} ({len(frame)} rows, {frame.shape[1]} columns)")
    return 0
