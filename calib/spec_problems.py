"""Problems of a spec document, collected with their field paths and raised together as one error.

A spec is validated table by table (:mod:`calib.sweep.spec` for the document, :mod:`calib.sweep.kgrid`
for ``sweep.k``, :mod:`calib.solvers.settings` for ``[solver]``, :mod:`calib.verdicts.target` for
``[target]``). Each part records what it finds in one :class:`ProblemList` as (path, problem, fix),
``path`` in TOML terms (``families[0].sizes[1].rows``), and validation ends with one
:class:`SpecError` listing them all, so a user fixes every problem in one pass. It is an
:class:`~calib.errors.InputError`: one line on the command line, exit code 2. Costs: O(problems).
"""

from __future__ import annotations

from typing import Any, Optional

from calib.checks import is_integer
from calib.errors import InputError


class SpecError(InputError):
    """One or more problems in a spec; the message lists each with its field path."""

    def __init__(self, source: str, problems: list[tuple[str, str, str]]):
        self.problems = problems
        parts = [f"{path}: {problem}" + (f" ({fix})" if fix else "") for path, problem, fix in problems]
        count = f"{len(problems)} problems: " if len(problems) > 1 else ""
        super().__init__(source, count + "; ".join(parts))


class ProblemList:
    """The problems found in one document, each as (field path, problem, fix), collected so that
    one :class:`SpecError` lists them all; the helpers check a value and record what is wrong."""

    def __init__(self) -> None:
        self.problems: list[tuple[str, str, str]] = []

    def add(self, path: str, problem: str, fix: str = "") -> None:
        """Record that ``path`` (``families[0].sizes[1].rows``) has ``problem``, fixed by ``fix``."""
        self.problems.append((path, problem, fix))

    def table(self, raw: dict, key: str, path: str) -> dict:
        """The sub-table ``raw[key]``; {} (and a problem) when it is missing or not a table."""
        value = raw.get(key)
        if value is None:
            self.add(path, "missing table", f"add a [{key}] table")
            return {}
        if not isinstance(value, dict):
            self.add(path, f"must be a table, got {type(value).__name__}", f"write it as [{key}]")
            return {}
        return value

    def integer(self, table: dict, key: str, path: str, minimum: int, default: Any = None) -> Optional[int]:
        """``table[key]`` (else ``default``) as an integer >= ``minimum``; None (and a problem) otherwise."""
        value = table.get(key, default)
        if value is None:
            self.add(path, "missing", f"set {key} to an integer >= {minimum}")
            return None
        if not is_integer(value):
            self.add(path, f"must be an integer, got {value!r}", f"set {key} to an integer >= {minimum}")
            return None
        if value < minimum:
            self.add(path, f"must be >= {minimum}, got {value}", f"set {key} to an integer >= {minimum}")
            return None
        return value

    def unknown_keys(self, table: dict, allowed: set, path: str) -> None:
        """One problem per key of ``table`` outside ``allowed``, with the allowed keys as the fix."""
        for key in sorted(set(table) - allowed):
            self.add(f"{path}.{key}", "unknown key", f"allowed keys: {', '.join(sorted(allowed))}")
