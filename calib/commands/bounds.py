"""``calib bounds``: the published JL bounds side by side for one problem size.

    calib bounds --n 1001 --eps 0.2 [--failure 0.05] [--k 300]
    calib bounds --clusters 10 --eps 0.05 [--k 64]

prints, for each bound in :data:`calib.theory.BOUNDS`, the k it asks for at distortion eps, the
failure probability it then guarantees, and with ``--k`` the distortion it guarantees at that k.
With ``--clusters K`` instead of ``--n``: the clustering bounds of
:data:`calib.theory.CLUSTERING_BOUNDS` (every K-partition's k-means cost within 1 +- eps), which
depend on K and eps, not on the number of points.
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
    size = parser.add_mutually_exclusive_group(required=True)
    size.add_argument("--n", type=int, help="number of points to keep apart (an LP with N columns: N + 1)")
    size.add_argument("--clusters", type=int, metavar="K",
                      help="k-means into K clusters: the clustering bounds (eps bounds the error on every K-partition's "
                           "cost; a cost ratio <= 1 + tau needs eps = tau / (2 + tau))")
    parser.add_argument("--eps", type=float, help="relative distortion of squared distances, in (0, 1)")
    parser.add_argument("--k", type=int, help="a target dimension: also print the eps each bound guarantees")
    parser.add_argument("--failure", type=float, default=theory.DEFAULT_FAILURE,
                        help="total failure probability for the bounds that take one "
                             f"(default {theory.DEFAULT_FAILURE})")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    clustering = args.clusters is not None
    n = theory.check_points(args.clusters if clustering else args.n, "--clusters" if clustering else "--n")
    failure = theory.check_failure(args.failure, "--failure")
    if args.eps is None and args.k is None:
        raise InputError("bounds", "nothing to compute", "give --eps, --k or both")
    eps = None if args.eps is None else theory.check_eps(args.eps, "--eps")
    k = None if args.k is None else theory.check_k(args.k, "--k")
    header = ["bound"] + ([f"k for eps={eps:g}"] if eps is not None else []) \
        + ([f"eps at k={k}"] if k is not None else []) + ["failure <=", "reference"]
    print(_clustering_heading(n, eps, k) if clustering else _heading(n, eps, k, failure))
    chosen = theory.CLUSTERING_BOUNDS if clustering else theory.BOUNDS
    print(_table(header, [_row(bound, n, eps, k, failure) for bound in chosen.values()]))
    return 0


def _heading(n: int, eps: float | None, k: int | None, failure: float) -> str:
    asked = [f"n = {n} points"]
    if eps is not None:
        asked.append(f"eps = {eps:g}")
    if k is not None:
        asked.append(f"k = {k}")
    return f"JL bounds for {', '.join(asked)}; failure probability {failure:g} where a bound takes one"


def _clustering_heading(clusters: int, eps: float | None, k: int | None) -> str:
    """The heading of the clustering bounds.

    >>> _clustering_heading(10, 0.05, None)
    "Clustering bounds for K = 10 clusters, eps = 0.05: every K-partition's k-means cost within 1 +- eps (cost ratio <= 1.105)"
    """
    asked = [f"K = {clusters} clusters"] + ([f"eps = {eps:g}"] if eps is not None else []) + ([f"k = {k}"] if k is not None else [])
    ratio = f" (cost ratio <= {(1 + eps) / (1 - eps):.4g})" if eps is not None else ""
    return f"Clustering bounds for {', '.join(asked)}: every K-partition's k-means cost within 1 +- eps{ratio}"


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
