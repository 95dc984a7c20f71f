"""``calib report STORE|TABLE --html FILE``: one self-contained HTML page for a campaign.

From a store the report analyses it as ``calib tables`` does (``calib tables STORE --json ... --html
FILE`` writes the table and the report from one analysis). From a table file (``safe_k.json``) it
draws the report of that very table, with the timings file beside it (or ``--timings``) and, when
``--spec`` names the campaign's spec, the spec after its fingerprint is checked against the table's:
a report made so cannot contradict its table. A table carries no policy answer unless it was made
with ``--policy``, so such a report shows the policy k only then.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from calib.commands import options

#: analysis options a table file already fixed (its own predicate, tolerances and target)
_FIXED = ("preset", "max_gap", "max_obj_error", "max_infeasibility", "max_sign_violation", "max_distortion",
          "delta", "confidence", "tau", "eps")


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "report", help="write a self-contained HTML report of a store or of a table file",
        description="Analyse the store as `calib tables` does and write one HTML page (figures embedded) with the "
                    "safe-k tables, the laws beside the published bounds, success-against-k, safe-k-against-n and "
                    "error-against-speed-up figures, the policy answer per cell and the times against the fair "
                    "baseline, and the sweep spec. `calib tables STORE --json ... --html FILE` writes the report and "
                    "the table from one analysis; `calib report safe_k.json --html FILE` draws the report of a "
                    "table file (timings from the file beside it).")
    parser.add_argument("store", help="campaign store (.sqlite) written by `calib run`, or a table file (.json) written "
                                      "by `calib tables --json`")
    parser.add_argument("--html", type=Path, required=True, metavar="FILE", help="the HTML file to write")
    parser.add_argument("--timings", type=Path, metavar="FILE",
                        help="with a table file: its timings (`calib tables --timings`); default the file beside it "
                             "(safe_k.json -> timings.csv)")
    parser.add_argument("--spec", type=Path, metavar="SPEC",
                        help="with a table file: the campaign's spec (TOML), shown in the report once its fingerprint "
                             "matches the table's")
    options.add_analysis_options(parser)
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.campaign import analyse_store
    from calib.analysis.records import SafeKTable
    from calib.analysis.report import build_report
    from calib.analysis.timing import timing_frame
    from calib.commands.searches import replay_stored
    from calib.errors import InputError
    from calib.outputs import check_target, write_file

    check_target(args.html, "--html")
    if str(args.store).lower().endswith(".json"):
        table, timings, spec = from_table(args)
    else:
        if args.timings is not None or args.spec is not None:
            raise InputError("--timings/--spec", "only go with a table file", "drop them: a store holds its own")
        keywords = {**options.analysis_keywords(args), "policy": True}
        table, rows, spec, _ = analyse_store(args.store, options.predicate_options(args), replay=replay_stored, **keywords)
        timings = timing_frame(rows, table["analyses"][0])
    write_file(args.html, build_report(SafeKTable.from_dict(table), timings, spec), "--html")
    print(f"wrote {args.html}")
    return 0


def from_table(args: argparse.Namespace):
    """(table, timings frame, spec) of a report drawn from a table file (module text)."""
    import tomllib

    import pandas as pd

    from calib.analysis.lookup import timings_beside
    from calib.analysis.tablefile import read_table
    from calib.errors import InputError
    from calib.keys import stable_id

    given = [f"--{name.replace('_', '-')}" for name in _FIXED if getattr(args, name, None) is not None]
    given += ["--faster"] if args.faster else []
    given += ["--policy"] if args.policy else []
    if given:
        raise InputError(given[0], "a table file carries its own analysis (predicate, tolerances, target)",
                         "drop the analysis options, or give the store to analyse it again")
    table = read_table(args.store)
    path = args.timings or timings_beside(args.store)
    if path is None or not Path(path).is_file():
        raise InputError("--timings", f"no timings file {path} beside the table", "give --timings FILE (`calib tables --timings`)")
    timings = pd.read_csv(path, dtype={"params": str, "size": str})
    spec = {}
    if args.spec is not None:
        try:
            spec = tomllib.loads(Path(args.spec).read_text(encoding="utf-8"))
        except (OSError, tomllib.TOMLDecodeError) as error:
            raise InputError(str(args.spec), f"cannot read the spec: {error}", "give the campaign's TOML spec") from None
        if stable_id(spec, 32) != table["campaign"]["spec_fingerprint"]:
            raise InputError(str(args.spec), "is not the spec of this table (its fingerprint differs)",
                             "give the spec the campaign was run with")
    return table, timings, spec
