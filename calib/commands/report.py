"""``calib report STORE --html FILE``: one self-contained HTML page for a campaign."""

from __future__ import annotations

import argparse
from pathlib import Path

from calib.commands.tables import add_analysis_options


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "report", help="write a self-contained HTML report of a store",
        description="Analyse the store as `calib tables` does and write one HTML page (figures embedded) with the "
                    "safe-k tables, the laws beside the published bounds, success-against-k, safe-k-against-n and "
                    "error-against-speed-up figures, the policy answer per cell and the times against the fair "
                    "baseline, and the sweep spec. `calib tables STORE --json ... --html FILE` writes the report and "
                    "the table from one analysis.")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`")
    parser.add_argument("--html", type=Path, required=True, metavar="FILE", help="the HTML file to write")
    add_analysis_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.report import build_report
    from calib.analysis.timing import timing_frame
    from calib.commands.tables import analyse
    from calib.outputs import check_target, write_file

    check_target(args.html, "--html")
    table, rows, spec, _ = analyse(args, policy=True)
    timings = timing_frame(rows, table["analyses"][0])
    html = build_report(table, timings, spec)
    write_file(args.html, html, "--html")
    print(f"wrote {args.html}")
    return 0
