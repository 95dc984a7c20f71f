"""``calib lookup TABLE``: which k for a family, size and projector; or, with --k, how good is k."""

from __future__ import annotations

import argparse
import json


def _param(text: str) -> tuple[str, str]:
    if "=" not in text:
        raise argparse.ArgumentTypeError(f"expected KEY=VALUE, got {text!r}")
    key, value = text.split("=", 1)
    return key.strip(), value.strip()


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "lookup", help="answer k for a size from a safe-k table, or the success at a given k",
        description="Read a safe-k table (refused if edited or of another format version) and answer the k that "
                    "meets the target 1 - delta for the class at size n: from the law k = a + C ln n fitted over "
                    "the measured sizes (flagged when n lies outside them) and from the logistic model. With --k, "
                    "answer the other way: the expected success at that k and the measured error.")
    parser.add_argument("table", help="safe-k table JSON written by `calib tables --json`")
    parser.add_argument("--family", required=True, help="family name as in the table")
    parser.add_argument("--n", required=True, type=int,
                        help="points the projection must keep (the JL n): for an LP with rows projected, its columns + 1")
    parser.add_argument("--projector", required=True, help="projector label as in the table, e.g. gaussian")
    parser.add_argument("--retrieval", help="retrieval method (needed when the table has several)")
    parser.add_argument("--param", type=_param, action="append", default=[], metavar="KEY=VALUE",
                        help="non-size family parameter to pick a class when several share the family (repeatable)")
    parser.add_argument("--tau", type=float, help="tolerance; the table's nearest stricter one is used when not exact")
    parser.add_argument("--delta", type=float, help="target success rate 1 - delta (default: the table's)")
    parser.add_argument("--confidence", type=float, help="confidence of the safe-k rule (default: the table's)")
    parser.add_argument("--k", type=int, help="answer the inverse question: expected success and error at this k")
    parser.add_argument("--json", action="store_true", help="print the answer as JSON")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.analysis.lookup import Query, k_for, success_for
    from calib.analysis.tablefile import read_table
    from calib.analysis.tables import Confidence

    table = read_table(args.table)
    query = Query(args.family, args.n, args.projector, args.retrieval, dict(args.param), args.tau)
    if args.k is not None:
        answer = success_for(table, query, args.k)
    else:
        target = table["target"]
        confidence = Confidence(args.delta if args.delta is not None else target["delta"],
                                args.confidence if args.confidence is not None else target["confidence"])
        answer = k_for(table, query, confidence)
    print(json.dumps(answer, indent=2, sort_keys=True) if args.json else render(answer))
    return 0


def _fmt(value, spec: str = ".3g") -> str:
    return "n/a" if value is None else format(value, spec)


def render(answer: dict) -> str:
    """Human-readable answer of either direction."""
    head = (f"{answer['family']} n={answer['n']} | {answer['projector']} | {answer['retrieval']} | "
            f"predicate {answer['predicate']} (tau = {answer['tau']})")
    lines = [head]
    if answer["note"]:
        lines.append(f"note: {answer['note']}")
    if answer["extrapolated"]:
        lines.append(f"EXTRAPOLATED: n={answer['n']} lies outside the measured n {answer['measured_n']}")
    if "safe_k" in answer:
        lines.append(f"safe k = {_fmt(answer['safe_k'], '')}  ({answer['method']}; target {1 - answer['delta']:.3g} "
                     f"at {answer['confidence']:.0%} confidence)")
        lines.append(f"logistic model: success reaches {1 - answer['delta']:.3g} at k = {_fmt(answer['k_model'])}"
                     + (f" ({answer['model_reason']})" if answer["model_reason"] else ""))
        if "policy" in answer:
            policy = answer["policy"]
            lines.append(f"policy (measured at {policy['from_size']}): "
                         + (f"k = {policy['k']}, {policy['answer']}" if policy["k"] is not None else policy["answer"]))
    else:
        near = answer["nearest_measured"]
        error = answer["error"]
        lines.append(f"k = {answer['k']}: expected success {_fmt(answer['success'])}"
                     + (f" ({answer['model_reason']})" if answer["model_reason"] else ""))
        lines.append(f"measured at {near['size']}, k={near['k']}: rate {near['rate']:.3f}, lower bound "
                     f"{near['lower_bound']:.3f} over {near['trials']} trials")
        if "policy_at_k" in answer:
            point = answer["policy_at_k"]
            lines.append(f"usable and faster than the fair baseline at {point['size']}, k={point['k']}: {point['successes']} "
                         f"trials, lower bound {_fmt(point['lower_bound'])}, median {_fmt(point['time_median_s'])} s against "
                         f"{_fmt(point['baseline_median_s'])} s; policy k there: {_fmt(point['policy_k'], '')}")
        if error["metric"]:
            lines.append(f"error {error['metric']} at {error['from_size']}: median {_fmt(error['median'])}, "
                         f"90th percentile {_fmt(error['q90'])}")
    return "\n".join(lines)
