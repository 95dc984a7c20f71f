"""The command-line options the commands share, and their reading into keyword values.

Not a command (it has no ``register``): :mod:`calib.cli` builds a sub-command from every module of
:mod:`calib.commands` that has one. A command adds the groups it takes (:func:`add_predicate_options`:
the success predicate and the target; :func:`add_analysis_options`: those plus the tolerance ladder,
the policy answer, the eps of the bounds and the solver-error rule), parses, then reads them here
into plain values (:func:`predicate_options`, :func:`analysis_keywords`) and calls the logic with
keywords; no logic below the commands sees an argparse Namespace.
"""

from __future__ import annotations

import argparse

from calib.analysis.campaign import PredicateOptions


def add_predicate_options(parser: argparse.ArgumentParser) -> None:
    """Options that choose the success predicate and the confidence target (shared with `probe`)."""
    from calib.verdicts.success import PRESETS

    group = parser.add_argument_group("success predicate (decided now, from stored metrics; no re-run needed)")
    group.add_argument("--preset", default=None, choices=sorted(PRESETS) + ["solution"],
                       help="default: a store written by a k search is read under its search's own [target]; otherwise "
                            "'usable' for LPs, SDPs and QPs and 'distortion' for point sets (every kind gets a predicate "
                            "that decides something on it). "
                            "'usable': the verdict matches and "
                            "the point of each retrieval meets --max-obj-error, --max-infeasibility and --max-sign-violation; "
                            "'policy': usable and faster end to end than the original solved by its fastest method; "
                            "'bound': the projected optimum is within --max-gap of the original; "
                            "'classify': only the feasibility verdict must match; "
                            "'distortion': point sets, worst pairwise distortion within --max-distortion; "
                            "'clustering': the projected partition's cost on the original points within 1 + "
                            "--max-cost-excess of the original partition's")
    group.add_argument("--faster", action="store_true",
                       help="on any preset: a trial also has to be faster end to end (sketch + projected solve + "
                            "retrieval) than the fair baseline; depends on measured times")
    group.add_argument("--max-gap", type=float, metavar="TAU", help="relative gap of the projected optimum (bound preset: 0.05)")
    group.add_argument("--max-obj-error", type=float, metavar="TAU", help="objective error of the retrieved point relative to the objective's scale (usable preset: 0.05)")
    group.add_argument("--max-infeasibility", type=float, metavar="TAU", help="feasibility error, e.g. ||Ax-b|| over the kind's scale (usable preset: 0.05)")
    group.add_argument("--max-sign-violation", type=float, metavar="TAU", help="cone violation ||min(x,0)||/||x|| or the PSD analogue (usable preset: 0.05)")
    group.add_argument("--max-distortion", type=float, metavar="TAU", help="worst pairwise distortion of squared distances for point sets (distortion preset: 0.2)")
    group.add_argument("--max-cost-excess", type=float, metavar="TAU", help="clustering: cluster_cost_ratio - 1 of the projected partition (clustering preset: 0.05)")
    group.add_argument("--delta", type=float, help="target success rate is 1 - delta (default 0.1, or the k search's own)")
    group.add_argument("--confidence", type=float,
                       help="confidence of the lower bound and the intervals (default 0.95, or the k search's own)")


def add_analysis_options(parser: argparse.ArgumentParser) -> None:
    """The predicate options plus the tolerance ladder and the eps of the bounds (tables, report)."""
    add_predicate_options(parser)
    group = parser.add_argument_group("tolerance ladder and theory")
    group.add_argument("--tau", type=float, nargs="+", metavar="TAU",
                       help="a ladder of primary tolerances: one analysis per value, each setting the tolerance(s) of the preset "
                            "(e.g. --tau 0.01 0.05 0.1); `calib lookup --tau` then picks among them")
    group.add_argument("--policy", action="store_true",
                       help="add the policy answer per cell: the k with the smallest median end-to-end time among the k "
                            "where usable-and-faster trials reach the target, or 'no k saves time at this size' (rests on "
                            "measured times, so the table then differs between runs)")
    group.add_argument("--eps", type=float, help="eps at which the published JL bounds are compared for LPs/SDPs/QPs "
                                                 "(default: the primary tolerance tau; point sets always use the distortion tolerance)")
    group.add_argument("--solver-errors", default="exclude", metavar="{exclude,fail}",
                       help="projected solves that end in a solver error: 'exclude' counts them in their own column and "
                            "leaves them out of the rates (default); 'fail' counts them as failures (strict reading). "
                            "A time limit is always a failure")


#: --max-* option (its argparse dest) -> the tolerance name of :func:`calib.verdicts.success.make_predicate`
TOLERANCE_OPTIONS = {"max_gap": "gap", "max_obj_error": "obj", "max_infeasibility": "feas",
                     "max_sign_violation": "sign", "max_distortion": "distortion", "max_cost_excess": "cost"}


def predicate_options(args: argparse.Namespace) -> PredicateOptions:
    """The parsed options of :func:`add_predicate_options` as a :class:`PredicateOptions`."""
    return PredicateOptions(preset=args.preset, faster=args.faster,
                            tolerances={name: getattr(args, dest, None) for dest, name in TOLERANCE_OPTIONS.items()},
                            delta=args.delta, confidence=args.confidence)


def analysis_keywords(args: argparse.Namespace) -> dict:
    """The parsed options of :func:`add_analysis_options` beyond the predicate, as the keywords of
    :func:`calib.analysis.campaign.analyse_store` (taus, eps, solver_errors, policy)."""
    return {"taus": args.tau, "eps": args.eps, "solver_errors": args.solver_errors, "policy": args.policy}
