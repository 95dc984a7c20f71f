"""``calib bounds``: the published JL bounds side by side for one problem size.

    calib bounds --n 1001 --eps 0.2 [--failure 0.05] [--k 300]

prints, for each bound in :data:`calib.theory.BOUNDS`, the k it asks for at distortion eps, the
failure probability it then guarantees, and with ``--k`` the distortion it guarantees at that k.
"""

from __future__ import annotations

import argparse
import math

from calib import theory
from calib.errors import InputError


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "bounds", help="print the published JL target-dimension bounds for n points",
        description="Print each published Johnson–Lindenstrauss bound: the k it needs for n points "
                    "at distortion eps and, with --k, the distortion it guarantees at that k.")
    parser.add_argument("--n", type=int, required=True,
                        help="number of points to keep apart (an LP with N columns: N + 1)")
    parser.add_argument("--eps", type=float, help="relative distortion of squared distances, in (0, 1)")
    parser.add_argument("--k", type=int, help="a target dimension: also print the eps each bound guarantees")
    parser.add_argument("--failure", type=float, default=theory.DEFAULT_FAILURE,
                        help="total failure probability for the bounds that take one "
                             f"(default {theory.DEFAULT_FAILURE})")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    n = theory.check_points(args.n, "--n")
    failure = theory.check_failure(args.failure, "--failure")
    if args.eps is None and args.k is None:
        raise InputError("bounds", "nothing to compute", "give --eps, --k or both")
    eps = None if args.eps is None else theory.check_eps(args.eps, "--eps")
    k = None if args.k is None else theory.check_k(args.k, "--k")
    header = ["bound"] + ([f"k for eps={eps:g}"] if eps is not None else []) \
        + ([f"eps at k={k}"] if k is not None else []) + ["failure <=", "reference"]
    print(_heading(n, eps, k, failure))
    print(_table(header, [_row(bound, n, eps, k, failure) for bound in theory.BOUNDS.values()]))
    return 0


def _heading(n: int, eps: float | None, k: int | None, failure: float) -> str:
    asked = [f"n = {n} points"]
    if eps is not None:
        asked.append(f"eps = {eps:g}")
    if k is not None:
        asked.append(f"k = {k}")
    return f"JL bounds for {', '.join(asked)}; failure probability {failure:g} where a bound takes one"


def _row(bound: theory.Bound, n: int, eps: float | None, k: int | None, failure: float) -> list[str]:
    parameters = bound.parameters(n, failure)
    name = bound.name + "".join(f" ({key}={value:.3g})" for key, value in parameters.items() if key != "failure")
    row = [name]
    if eps is not None:
        row.append(str(int(bound.k(n, eps, **parameters))))
    if k is not None:
        row.append(_number(float(bound.eps(n, k, **parameters)), "none < 1"))
    return row + [_number(bound.failure_bound(n, failure), "not stated"), bound.reference]


def _number(value: float, missing: str) -> str:
    return missing if math.isnan(value) else f"{value:.4g}"


def _table(header: list[str], rows: list[list[str]]) -> str:
    widths = [max(len(cell) for cell in column) for column in zip(header, *rows)]
    lines = [header, ["-" * width for width in widths], *rows]
    return "\n".join("  ".join(cell.ljust(width) for cell, width in zip(line, widths)).rstrip() for line in lines)
