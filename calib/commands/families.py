"""``calib families [NAME] [--json]``: the registered instance families and their parameters."""

from __future__ import annotations

import json
import textwrap
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # importing calib.families builds every family module (~0.7 s): only `run` needs it
    from calib.families import Family

WIDTH = 100


def describe(family: Family) -> dict:
    """A JSON-able description of one family."""
    from calib.problems.kinds import counting

    return {
        "name": family.name,
        "kind": family.kind,
        "description": family.description,
        "size_keys": list(family.size_keys),
        "counting": counting(family.kind),
        "parameters": [{"name": key, "default": family.defaults[key], "required": key in family.size_keys and family.defaults[key] is None,
                        "doc": family.param_doc.get(key, "")} for key in family.defaults],
    }


def _default_text(entry: dict) -> str:
    if entry["required"]:
        return "required"
    if entry["default"] is None:
        return "optional"
    return "default " + json.dumps(entry["default"])


def render(family: Family) -> str:
    """Plain-text block: name, kind, wrapped description, one line per parameter."""
    entry = describe(family)
    lines = [f"{family.name}  [{family.kind}]"]
    lines += textwrap.wrap(family.description, WIDTH, initial_indent="  ", subsequent_indent="  ")
    lines += textwrap.wrap(entry["counting"], WIDTH, initial_indent="  n and m: ", subsequent_indent="  " + " " * 9)
    lines.append("  parameters:")
    pad = max(len(p["name"]) for p in entry["parameters"])
    for param in entry["parameters"]:
        head = f"    {param['name']:<{pad}}  ({_default_text(param)}) "
        lines += textwrap.wrap(param["doc"], WIDTH, initial_indent=head, subsequent_indent=" " * (pad + 6))
    return "\n".join(lines)


def register(subparsers) -> None:
    parser = subparsers.add_parser("families", help="list the instance families and their parameters",
                                   description="List every registered instance family with its problem kind, "
                                               "what it models and its parameters; give NAME to show one.")
    parser.add_argument("name", nargs="?", help="show only this family")
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")
    parser.set_defaults(func=run)


def run(args) -> int:
    from calib.families import REGISTRY, get

    chosen = [get(args.name, "calib families NAME")] if args.name else [REGISTRY[key] for key in sorted(REGISTRY)]
    if args.json:
        payload = [describe(family) for family in chosen]
        print(json.dumps(payload[0] if args.name else payload, indent=2))
    else:
        print("\n\n".join(render(family) for family in chosen))
    return 0
