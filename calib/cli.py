"""Command-line entry point: ``calib COMMAND ...`` (also ``python -m calib``).

User errors (:class:`calib.errors.InputError`) print one line ``calib: error: ...`` on stderr and
exit with code 2, with no traceback.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
from typing import Optional, Sequence

from calib import __version__
from calib.errors import InputError


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (exit code 2): ``calib: error: COMMAND: problem (see `calib COMMAND --help`)``."""

    def error(self, message: str):  # noqa: D401 - argparse hook
        command = self.prog.partition(" ")[2]
        where = f"{command}: " if command else ""
        self.exit(2, f"calib: error: {where}{message} (see `{self.prog} --help`)\n")


def build_parser() -> argparse.ArgumentParser:
    import calib.commands as commands

    parser = _Parser(prog="calib", description="Calibrate random-projection sizes for LPs, SDPs and QPs: "
                     "run sweeps, store every measurement, publish safe-k tables.")
    parser.add_argument("--version", action="version", version=f"calib {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in sorted(pkgutil.iter_modules(commands.__path__), key=lambda mod: mod.name):
        command = importlib.import_module(f"calib.commands.{module.name}")
        if hasattr(command, "register"):  # options and searches are shared by the commands, not commands
            command.register(subparsers)
    return parser


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = build_parser()
    args, extra = parser.parse_known_args(argv)
    if extra:  # reported by the command's own parser, which names its help page
        commands = parser._subparsers._group_actions[0].choices if parser._subparsers else {}
        (commands.get(getattr(args, "command", None)) or parser).error(f"unrecognized arguments: {' '.join(extra)}")
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except InputError as error:
        print(f"calib: error: {error}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into `head` and the like
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("calib: interrupted; everything finished so far is stored (run the same command again to resume)", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
