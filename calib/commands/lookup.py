"""``calib lookup TABLE``: which k for a family, size and projector; or, with --k, how good is k."""

from __future__ import annotations

import argparse
import json
import math
from typing import Optional


def _param(text: str) -> tuple[str, str]:
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"expected KEY=VALUE, got {text!r}")
    key, value = text.split("=", 1)
    return key.strip(), value.strip()


def _size(text: str) -> dict:
    pairs = {}
    for part in filter(None, (item.strip() for item in text.split(","))):
        key, value = _param(part)
        pairs[key] = value
    if not pairs:
        raise argparse.ArgumentTypeError(f"expected KEY=VALUE[,KEY=VALUE...], got {text!r}")
    return pairs


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "lookup", help="answer k for a size from a safe-k table, or the success at a given k",
        description="Read a safe-k table (refused if edited or of another format version) and answer the k that "
                    "meets the target 1 - delta at a size given in the family's own terms (--size, an MPS file or a "
                    "saved instance; --n/--m for experts). The class answer by default (--scope instances for the "
                    "instances measured). A measured size gets its measured safe k; another size the law "
                    "k = a + C ln n fitted over the uncensored sizes (flagged with how far when n lies outside them). "
                    "Never a k above the projected dimension: 'no reduction meets the target at this size' instead. "
                    "With --k, answer the other way: the expected success at that k and the measured error.")
    parser.add_argument("table", nargs="?", help="safe-k table JSON written by `calib tables --json`; default the atlas: "
                                                 "the file or folder in $CALIB_ATLAS, else the shipped results/atlas "
                                                 "(`make atlas` creates it)")
    parser.add_argument("--family", help="family name as in the table (read from the manifest with --instance; "
                                         "an LP family of the table with --mps)")
    where = parser.add_mutually_exclusive_group(required=True)
    where.add_argument("--size", type=_size, metavar="KEY=VALUE[,...]",
                       help="the size in the family's own keys, e.g. --size rows=2000,cols=4000; n and the projected "
                            "dimension m come from the family's own rules")
    where.add_argument("--mps", metavar="FILE", help="an LP in an MPS file: n = its standard form's columns + 1, m = its rows")
    where.add_argument("--instance", metavar="MANIFEST", help="an instance saved by calib (its .json manifest)")
    where.add_argument("--n", type=int,
                       help="(experts) points the projection must keep (the JL n): for an LP with rows projected, its "
                            "columns + 1; give --m too so the answer is capped at the projected dimension")
    parser.add_argument("--m", type=int, help="(experts, with --n) the projected dimension m of the size")
    parser.add_argument("--scope", default="class", choices=("class", "instances"),
                        help="'class' (default): the safe k for the class the measured instances were drawn from; "
                             "'instances': for the instances measured only")
    parser.add_argument("--projector", help="projector label as in the table, e.g. gaussian (default: the table's best "
                                            "projector for the class: the smallest safe k, then the largest speed-up)")
    parser.add_argument("--timings", metavar="FILE",
                        help="timings file (`calib tables --timings`) for the expected speed-up; default: the one "
                             "beside the table (safe_k.json -> timings.csv, safe_k-points.json -> timings-points.csv)")
    parser.add_argument("--retrieval", help="retrieval method (needed when the table has several)")
    parser.add_argument("--param", type=_param, action="append", default=[], metavar="KEY=VALUE",
                        help="non-size family parameter to pick a class when several share the family (repeatable)")
    parser.add_argument("--tau", type=float, help="tolerance; the table's nearest stricter one is used when not exact")
    parser.add_argument("--delta", type=float, help="target success rate 1 - delta (default: the table's)")
    parser.add_argument("--confidence", type=float, help="confidence of the safe-k rule (default: the table's)")
    parser.add_argument("--k", type=int, help="answer the inverse question: expected success and error at this k")
    parser.add_argument("--json", action="store_true", help="print the answer as JSON")
    parser.add_argument("--force", action="store_true",
                        help="show the class's answer even when the model lies outside the structure of the instances "
                             "behind it (the fit check: rank, stable rank, row coherence, density, aspect; flagged)")
    parser.add_argument("--k-only", action="store_true",
                        help="print only the safe k, or 'none' when no reduction meets the target (for scripts)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.lookup import answer, read_timings, timings_beside
    from calib.analysis.records import SafeKTable
    from calib.analysis.tablefile import read_table
    from calib.atlas import table_path

    query = query_from(args)
    path = table_path(query.family, args.table)
    table = SafeKTable.from_dict(read_table(path))  # the typed records the lookup reads
    beside = timings_beside(path)
    timings = read_timings(args.timings) if args.timings else (read_timings(beside) if beside else [])
    model = None if args.k is not None else model_from(args, query)
    result = answer(table, query, k=args.k, delta=args.delta, confidence=args.confidence, timings=timings,
                    model=model, force=args.force)
    if args.k_only:
        print("none" if result.get("safe_k") is None or result["safe_k"] >= (result["m"] or math.inf) else result["safe_k"])
    else:
        print(json.dumps(result, indent=2, sort_keys=True) if args.json else render(result))
    return 0


def query_from(args: argparse.Namespace):
    """The :class:`Query` of the parsed options: n and m from the size, the file or the instance."""
    from calib.analysis.lookup import Query, size_of, size_of_instance, size_of_mps
    from calib.errors import InputError

    params, family, m, label = dict(args.param), args.family, args.m, ""
    if args.instance:
        family, n, m, label, class_params = size_of_instance(args.instance)
        if args.family and args.family != family:
            raise InputError("--family", f"{args.family!r} differs from the instance's family {family!r}", "omit --family")
        params = {**{key: json.dumps(value) for key, value in class_params.items() if value is not None}, **params}
    elif family is None:
        raise InputError("--family", "is required with --size, --mps and --n", "e.g. --family lp-planted")
    elif args.mps:
        n, m, label = size_of_mps(args.mps)
    elif args.size is not None:
        n, m, label = size_of(family, args.size, params)
    else:
        n = args.n
    if args.m is not None and args.n is None:
        raise InputError("--m", "goes with --n only", "the other size options compute m themselves")
    return Query(family, n, args.projector, args.retrieval, params, args.tau, m, args.scope, label)


def model_from(args: argparse.Namespace, query) -> Optional[dict]:
    """The user's model for the fit check: the MPS file, the saved instance, or a fresh instance of the
    family at --size (:mod:`calib.analysis.modelfit`); None with --n."""
    from calib.analysis import modelfit

    if args.mps:
        return modelfit.mps_model(args.mps)
    if args.instance:
        return modelfit.instance_model(args.instance)
    if args.size is not None:
        return modelfit.size_request(query.family, args.size, dict(args.param))
    return None


def _fmt(value, spec: str = ".3g") -> str:
    return "n/a" if value is None else format(value, spec)


def _projector_note(answer: dict) -> str:
    """Which projector answered when none was named, and the others' safe k."""
    others = answer.get("other_projectors", {})
    if answer["safe_k"] is None and all(value is None for value in others.values()):
        return f"; none of the table's projectors reduces it ({', '.join(sorted([answer['projector'], *others]))})"
    return "; the best projector of the table (others: " + ", ".join(
        f"{name} {'none' if value is None else value}" for name, value in sorted(others.items())) + ")"


def render(answer: dict) -> str:
    """Human-readable answer of either direction: the answer on the first line, then how it was found."""
    from calib.wording import wrapped

    size = f" {answer['size']}" if answer.get("size") else ""
    m = f" m={answer['m']}" if answer.get("m") is not None else ""
    lines = []
    if "safe_k" in answer:
        scope = "the class" if answer["scope"] == "class" else "the instances measured only"
        lines.append(answer["answer"])
        lines.append(f"  for {answer['family']}{size} (n = {answer['n']}{', m = ' + str(answer['m']) if answer['m'] else ''})"
                     + ("" if answer.get("projector_named", True) else _projector_note(answer)))
        if answer.get("speedup") and answer["speedup"]["where"] != "at this size":
            lines.append(f"  speed-up {answer['speedup']['where']}")
        lines.append(f"  how: {answer['method']}"
                     + (f"; EXTRAPOLATED: {answer['extrapolation']} (measured n {answer['measured_n']})"
                        if answer["extrapolated"] else ""))
        lines.append(f"  target: {1 - answer['delta']:.3g} success at {answer['confidence']:.0%} confidence for {scope} "
                     f"({answer['instances']} instances per measured size), predicate {answer['predicate']} "
                     f"(tau = {answer['tau']}), retrieval {answer['retrieval']}")
        if answer["flag"] and answer["safe_k"] is None:
            lines.append(f"  why: {answer['flag']}")
        elif answer["flag"] and answer["safe_k"] < (answer["m"] or math.inf):
            lines.append(f"  flag: {answer['flag']}")
        if answer["note"]:
            lines.append(f"  note: {answer['note']}")
        check = answer.get("fit_check")
        if check and check["verdict"] != "not compared":
            lines.append(f"  fit check ({check['model']}): {check['verdict']}: {check['reason']}")
        if answer.get("withheld") and answer.get("prediction"):
            prediction = answer["prediction"]
            lines.append("  predicted from features: " + (f"k = {prediction['k']}, {prediction['reason']}"
                                                           if prediction["k"] is not None else prediction["reason"]))
        if "policy" in answer:
            policy = answer["policy"]
            lines.append(f"  policy (measured at {policy['from_size']}): "
                         + (f"k = {policy['k']}, {policy['answer']}" if policy["k"] is not None else policy["answer"]))
        if answer["k_model"] is not None:
            lines.append(f"  cross-check: the logistic fit of success on ln k expects {1 - answer['delta']:.3g} success "
                         f"at k = {_fmt(answer['k_model'])}, a point estimate without a confidence claim; the safe k "
                         f"is the certified answer")
    else:
        near = answer["nearest_measured"]
        error = answer["error"]
        chosen = "" if answer.get("projector_named", True) else " (the best projector of the table)"
        lines.append(f"k = {answer['k']} with {answer['projector']}{chosen}: expected success {_fmt(answer['success'])}"
                     + (f" ({answer['model_reason']})" if answer["model_reason"] else ""))
        lines.append(f"  {answer['family']}{size} n={answer['n']} | {answer['retrieval']} | predicate {answer['predicate']} "
                     f"(tau = {answer['tau']})")
        if answer["note"]:
            lines.append(f"  note: {answer['note']}")
        if answer["extrapolated"]:
            lines.append(f"  EXTRAPOLATED: {answer['extrapolation']} (measured n {answer['measured_n']})")
        lines.append(f"  measured at {near['size']}, k={near['k']}: rate {near['rate']:.3f}, lower bound "
                     f"{near['lower_bound']:.3f} over {near['trials']} trials")
        if "policy_at_k" in answer:
            point = answer["policy_at_k"]
            lines.append(f"  usable and faster than the fair baseline at {point['size']}, k={point['k']}: {point['successes']} "
                         f"trials, lower bound {_fmt(point['lower_bound'])}, median {_fmt(point['time_median_s'])} s against "
                         f"{_fmt(point['baseline_median_s'])} s; policy k there: {_fmt(point['policy_k'], '')}")
        if error["metric"]:
            lines.append(f"  error {error['metric']} at {error['from_size']}: median {_fmt(error['median'])}, "
                         f"90th percentile {_fmt(error['q90'])}")
    lines.append("Safe-k tables are empirical evidence, not a proof: check the policy on your own instances (`calib probe`).")
    out = []
    for line in lines:
        indent = line[:len(line) - len(line.lstrip())]
        out += wrapped(line.strip(), indent)
    return "\n".join(out)
