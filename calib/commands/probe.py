"""``calib probe TARGET``: what would happen to one model at one k.

TARGET is one of: a registered family with ``--param key=value`` parameters (instance 0 of that
family); an MPS file (read as an LP in standard form: the family ``mps-dir`` with ``dir`` = the
folder as written and ``name`` = the file name); or a saved instance (the ``STEM.json`` manifest of
:func:`calib.instance_io.save_instance`, any kind). The original is solved once; then each
replicate draws a projector, solves the projected problem and runs the retrievals, exactly as one
campaign trial does (:func:`calib.trial.run_trial`). The random streams are those of a
campaign with ``root_seed = --seed`` on the same instance (family, parameters, index), so a probe
reproduces that campaign's rows. The output lists the metrics of every replicate, then the median
and maximum of each metric and the success count under the chosen predicate with its one-sided
Clopper–Pearson lower bound.

k: ``--k K`` directly (or a list ``--k 20,40``: one block per k), or ``--eps E`` through a
published bound (``--rule``) with the family's point count (for an MPS file: its standard-form
columns + 1); default k = ceil(m / 2) of the projected dimension m.

``--find-k [--low L --high H]`` runs the campaign's k search (:mod:`calib.sweep.search`) on this
one instance instead: at each k, trials (replicates 0, 1, ... of the campaign streams) are added
until the anytime confidence bound decides the k against the target rate 1 - ``--delta``, at most
``--max-trials`` per k, with bracket-then-bisection between L (default 1) and H (default m); it
prints the trace (k, trials, successes, bounds) and the verdict. One retrieval is searched: the
first ``--retrieval``, else the kind's default.

The parts: :mod:`calib.sweep.probe` resolves the target and runs the trials, :mod:`calib.analysis.probe`
summarises and prints them; this module reads the command line, chooses k and prints a k search
(its trace is the engine's, which the analysis does not import).
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path
from typing import Optional, Sequence

from calib.commands import options
from calib.errors import InputError


def register(subparsers) -> None:
    from calib.theory import RULES

    parser = subparsers.add_parser(
        "probe", help="project one instance at one k and show what comes back",
        description="Solve one instance (an MPS file, a saved instance or a family with parameters), project it at "
                    "one k for a few replicates, solve, retrieve, and print every metric per replicate and their "
                    "summary: what would happen to this model at this k.")
    parser.add_argument("target", metavar="INSTANCE_OR_FAMILY",
                        help="an MPS file (.mps, .mps.gz), a saved instance (STEM.json) or a family name (`calib families`)")
    parser.add_argument("--param", action="append", default=[], metavar="KEY=VALUE",
                        help="family parameter (repeatable), e.g. --param rows=200 --param cols=400")
    parser.add_argument("--projector", default="gaussian", help="projector family (default gaussian)")
    parser.add_argument("--projector-opt", action="append", default=[], metavar="KEY=VALUE",
                        help="projector option (repeatable), e.g. --projector-opt s=4")
    size = parser.add_mutually_exclusive_group()
    size.add_argument("--k", type=k_list, nargs="+", metavar="K",
                      help="projected size k, or several (--k 20 40, or --k 20,40): one block per k (default: half the "
                           "projected dimension, rounded up)")
    size.add_argument("--find-k", action="store_true",
                      help="search for the smallest k meeting the target rate 1 - --delta at --confidence (trace and verdict)")
    size.add_argument("--eps", type=float, help="distortion eps in (0, 1): k from the bound named by --rule")
    parser.add_argument("--rule", default="dasgupta-gupta", choices=sorted(RULES), help="bound used with --eps (default dasgupta-gupta)")
    parser.add_argument("--retrieval", action="append", metavar="R",
                        help="retrieval method (repeatable; default: every retrieval of the problem kind)")
    parser.add_argument("--replicates", type=int, default=5, help="independent projector draws (default 5)")
    parser.add_argument("--low", type=int, help="with --find-k: the smallest k searched (default 1)")
    parser.add_argument("--high", type=int, help="with --find-k: the largest k searched (default: the projected dimension)")
    parser.add_argument("--max-trials", type=int, default=300, metavar="N",
                        help="with --find-k: most trials at one k before it counts as not reaching the target (default 300)")
    parser.add_argument("--seed", type=int, default=0, help="root seed (default 0)")
    parser.add_argument("--time-limit", type=float, default=60.0, metavar="SECONDS", help="per solve (default 60)")
    parser.add_argument("--json", type=Path, metavar="FILE", help="also write the records and summary as JSON")
    options.add_predicate_options(parser)
    parser.set_defaults(func=run)


def k_list(text: str) -> list[int]:
    """``"20,40"`` -> ``[20, 40]`` (argparse type of ``--k``; a bad item is an argparse usage error).

    >>> k_list("20, 40"), k_list("12")
    ([20, 40], [12])
    """
    try:
        values = [int(item) for item in text.split(",") if item.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"cannot read {text!r}: give integers, e.g. --k 20 or --k 20,40") from None
    if not values:
        raise argparse.ArgumentTypeError("give at least one k, e.g. --k 20")
    return list(dict.fromkeys(values))


def given_ks(values) -> list[int]:
    """The k values of ``--k`` (each item a :func:`k_list`), in order, without repeats.

    >>> given_ks([[10], [20, 10], [40]])
    [10, 20, 40]
    """
    return list(dict.fromkeys(k for item in values for k in item))


def choose_ks(ks: Optional[Sequence[Sequence[int]]], m: int, n_points: int, eps: Optional[float] = None,
              rule: str = "dasgupta-gupta") -> list[tuple[int, str]]:
    """[(k, how it was chosen)], one per k of ``ks`` (the items of ``--k``, each a :func:`k_list`), else
    the single k of :func:`choose_k`; each k must lie in 1..m (the projected dimension)."""
    if not ks:
        return [choose_k(m, n_points, eps, rule)]
    chosen = []
    for k in given_ks(ks):
        if not 1 <= k <= m:
            raise InputError("--k", f"must lie in 1..{m} (the projected dimension), got {k}", f"pick k between 1 and {m}")
        chosen.append((k, "given"))
    return chosen


def choose_k(m: int, n_points: int, eps: Optional[float] = None, rule: str = "dasgupta-gupta") -> tuple[int, str]:
    """(k, how it was chosen): from distortion ``eps`` through the published bound ``rule`` at ``n_points``
    points, else ceil(m / 2); InputError when that k is above m."""
    from calib.theory import check_eps, k_from_eps

    if eps is not None:
        check_eps(eps, "--eps")
        k = k_from_eps(rule, n_points, eps)
        source = f"eps = {eps} by {rule} with {n_points} points"
        if k > m:
            raise InputError("--eps", f"{source} gives k = {k}, above the projected dimension m = {m}",
                             "raise --eps or give --k directly")
        return k, source
    return math.ceil(m / 2), "default: half the projected dimension"


def run(args: argparse.Namespace) -> int:
    from calib.analysis.probe import render, summarise
    from calib.outputs import check_target, write_file
    from calib.reduce import HANDLERS
    from calib.sweep.probe import check_projector, check_retrievals, measure_at_k, projector_choice, resolve_target

    _check_numbers(args)
    check_target(args.json, "--json")
    choice = projector_choice(args.projector, args.projector_opt)
    target = resolve_target(args.target, args.param, args.seed)
    predicate, confidence = _predicate(args, {"points": "distortion", "clustering": "clustering"}.get(target.kind, "usable"))
    handler = HANDLERS[target.kind]
    retrievals = check_retrievals(args.retrieval, target.kind)
    m = handler.projected_dim(target.problem)
    solver = {"time_limit_s": float(args.time_limit)}
    if not args.find_k and (args.low is not None or args.high is not None):
        raise InputError("--low/--high", "only bound a --find-k search", "add --find-k, or drop --low/--high")
    if args.find_k:
        if args.k is not None or args.eps is not None:
            raise InputError("--find-k", "searches k itself", "drop --k/--eps, or use --low and --high to bound the search")
        return find_k(target, choice, args.retrieval, m, solver, predicate, confidence, low=args.low, high=args.high,
                      max_trials=args.max_trials, seed=args.seed, json_path=args.json)
    chosen = choose_ks(args.k, m, target.n_points, args.eps, args.rule)
    for k, _ in chosen:
        check_projector(choice, k, m)
    baseline = handler.solve_baseline(target.problem, solver)
    original = baseline.result
    payloads = []
    for k, k_label in chosen:
        records = measure_at_k(target, choice, k, args.replicates, baseline, retrievals, solver)
        summary = summarise(records, target.kind, predicate, confidence)
        print(("\n" if payloads else "") + render(target, original, choice, k, k_label, m, records, summary, predicate, confidence,
                                                           baseline))
        payloads.append({"target": target.label, "kind": target.kind, "projector": choice.label, "k": k, "k_label": k_label,
                         "projected_dim": m, "seed": args.seed, "predicate": predicate.as_dict(), "records": records,
                         "baseline": {"method": baseline.fastest, "seconds": baseline.seconds,
                                      "methods": baseline.summary()},
                         "summary": summary})
    if args.json is not None:
        payload = payloads[0] if len(payloads) == 1 else {"runs": payloads}
        write_file(args.json, json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n", "--json")
        print(f"wrote {args.json}")
    return 0


def find_k(target, choice, retrieval: Optional[Sequence[str]], m: int, solver: dict, predicate, confidence, *,
           low: Optional[int] = None, high: Optional[int] = None, max_trials: int = 300, seed: int = 0,
           json_path: Optional[Path] = None) -> int:
    """``--find-k``: the k search of a campaign on this one instance (:func:`calib.sweep.probe.search_k`)
    for the first of ``retrieval`` (else the kind's default), between ``low`` (default 1) and ``high``
    (default m); prints the trace and the verdict, and writes them to ``json_path`` when given."""
    from calib.reduce import HANDLERS
    from calib.sweep.probe import check_projector, search_k

    low, high = _search_range(low, high, max_trials, m)
    check_projector(choice, low, m)
    chosen = (retrieval or [HANDLERS[target.kind].default_retrieval])[0]
    original = HANDLERS[target.kind].solve_original(target.problem, solver)
    search = search_k(target, choice, chosen, original, low=low, high=high, cap=max_trials, predicate=predicate,
                      rate=confidence.target, confidence=confidence.level, solver=solver)
    print(search_text(target, original, choice, chosen, search, m, predicate, max_trials, seed))
    if json_path is not None:
        from calib.outputs import write_file

        payload = {"target": target.label, "kind": target.kind, "projector": choice.label, "retrieval": chosen,
                   "low": low, "high": high, "seed": seed, "predicate": predicate.as_dict(),
                   "rate": confidence.target, "confidence": confidence.level, "safe_k": search.safe_k,
                   "reason": search.reason, "steps": [vars(step) for step in search.steps]}
        write_file(json_path, json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n", "--json")
        print(f"wrote {json_path}")
    return 0


def search_text(target, original, choice, retrieval: str, search, m: int, predicate, cap: int, seed: int) -> str:
    """The text of ``calib probe --find-k``: what was searched, the search's trace and verdict
    (:func:`calib.sweep.search.trace_lines`), the trials it ran and the evidence notice."""
    from calib.analysis.campaign import target_text
    from calib.analysis.probe import objective_text
    from calib.analysis.tables import NOTICE
    from calib.sweep.search import trace_lines
    from calib.problems.kinds import counting
    from calib.wording import fold

    objective = f", objective {objective_text(original.objective)}" if original.ok else ""
    lines = [f"probe --find-k: {target.label} ({target.kind}; projected dimension m = {m}, n = {target.n_points} points)",
             f"  n and m: {counting(target.kind)}",
             f"original: {original.status}{objective}",
             f"projector {choice.label}, retrieval {retrieval}, k in [{search.low}, {search.high}], at most {cap} trials per k",
             f"target: success rate >= {search.rate:g} under {target_text(predicate)}"]
    lines += trace_lines(search, f"success rate >= {search.rate:g}")
    lines += [f"trials run: {search.trials_read} (seed {seed}: the streams of a campaign with root_seed = {seed})", NOTICE]
    return fold(lines)


def _search_range(low: Optional[int], high: Optional[int], max_trials: int, m: int) -> tuple[int, int]:
    low = 1 if low is None else low
    high = m if high is None else high
    if not 1 <= low < high <= m:
        raise InputError("--low/--high", f"need 1 <= low < high <= {m} (the projected dimension), got {low} and {high}",
                         f"e.g. --low 1 --high {m}")
    if max_trials < 1:
        raise InputError("--max-trials", f"must be at least 1, got {max_trials}", "e.g. --max-trials 300")
    return low, high


def _check_numbers(args: argparse.Namespace) -> None:
    if args.replicates < 1:
        raise InputError("--replicates", f"must be at least 1, got {args.replicates}", "e.g. --replicates 5")
    if args.seed < 0:
        raise InputError("--seed", f"must be a non-negative integer, got {args.seed}", "e.g. --seed 0")
    if not (math.isfinite(args.time_limit) and args.time_limit > 0):
        raise InputError("--time-limit", f"must be a positive number of seconds, got {args.time_limit}", "e.g. --time-limit 60")


def _predicate(args: argparse.Namespace, default_preset: str):
    for value in (args.confidence, args.delta):
        if value is not None and not 0.0 < value < 1.0:
            raise InputError("--confidence/--delta", "must lie in (0, 1)", "e.g. --confidence 0.95 --delta 0.1")
    return options.predicate_options(args).resolve(default_preset)
