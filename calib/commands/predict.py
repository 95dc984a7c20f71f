"""``calib predict``: how well instance features predict k, and the prediction for one model when offered."""

from __future__ import annotations

import argparse


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "predict", help="the k predicted from instance features, with its leave-one-family-out and leave-one-size-out errors",
        description="Fit ln k50 and ln class safe k on the instance features and the target (projector, tolerance) of "
                    "every cell of safe-k tables (default: the atlas), and print the error of that fit measured by leaving "
                    "out one family at a time and one size at a time (calib.analysis.predict). With --mps, predict k for "
                    "that model, or say why no prediction is offered (a model of an unseen family is predicted only "
                    "when the leave-one-family-out error is within ±50%).")
    parser.add_argument("tables", nargs="*", help="safe-k tables (default: the atlas files)")
    parser.add_argument("--mps", metavar="FILE", help="an LP in an MPS file: predict its k (an unseen family)")
    parser.add_argument("--projector", default="gaussian", help="projector of the prediction (default gaussian)")
    parser.add_argument("--tau", type=float, default=0.05, help="tolerance of the prediction (default 0.05)")
    parser.add_argument("--json", action="store_true", help="print the assessment as JSON")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import json

    from calib.analysis import predict
    from calib.analysis.tablefile import read_table
    from calib.atlas import atlas_paths
    from calib.errors import InputError

    paths = args.tables or atlas_paths()[0]
    if not paths:
        raise InputError("calib predict", "no table given and no atlas found", "give table files or run `make atlas`")
    tables = [read_table(path) for path in paths]
    assessment = predict.assess(tables)
    print(predict.cells_json(assessment) if args.json else "\n".join(predict.verdict_lines(assessment)))
    if args.mps:
        from calib.features import instance_features
        from calib.problems.mps import read_mps_standard

        features = instance_features("lp", read_mps_standard(args.mps))
        answer = predict.predict(tables, features, args.projector, args.tau)
        print(f"{args.mps}: " + (f"k = {answer['k']}, {answer['reason']}" if answer["k"] is not None else answer["reason"]))
    return 0
