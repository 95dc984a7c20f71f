"""A light check of MPS text that names the line of the mistakes HiGHS reports vaguely or not at all.

HiGHS reads a number it cannot parse as 0 (``x0 r0 abc`` silently becomes a zero coefficient),
takes ``nan`` as a cost, and answers a misspelt row name with a fixed-format parser error. This
scan reads the file once, token by token in the free-MPS layout (IBM, "MPS file format", the
free variant HiGHS writes), and reports the first problem with its line number:

- a coefficient, right-hand side, range or bound that is not a number, or is NaN (anywhere) or
  infinite (in COLUMNS, where HiGHS refuses infinite entries);
- a row named in COLUMNS, RHS or RANGES that ROWS does not declare;
- a file that ends before its ENDATA line (a truncated file).

Lines whose token count does not fit the free layout (fixed-format names holding spaces) are left
to HiGHS, so the scan never refuses a file HiGHS would read correctly.
"""

from __future__ import annotations

import gzip
import math
from pathlib import Path
from typing import Iterable, Optional

#: bound types that carry a value (the others: FR, MI, PL, BV)
_VALUED_BOUNDS = {"UP", "LO", "FX", "LI", "UI", "SC"}
_SECTIONS = {"NAME", "ROWS", "COLUMNS", "RHS", "RANGES", "BOUNDS", "ENDATA", "OBJSENSE", "OBJSENSE MAX",
             "OBJSENSE MIN", "OBJSENSE MAXIMIZE", "OBJSENSE MINIMIZE", "OBJSECT", "QUADOBJ", "QMATRIX", "QSECTION",
             "QCMATRIX", "CSECTION", "SOS", "INDICATORS"}


def scan_mps(path: Path) -> Optional[str]:
    """The first problem of the MPS file at ``path`` as ``line N: ...``, or None when none is found."""
    opener = gzip.open if str(path).endswith(".gz") else open
    try:
        with opener(path, "rt", encoding="utf-8", errors="replace") as stream:
            return scan_lines(stream)
    except (OSError, EOFError):
        return None  # unreadable or a damaged .gz: HiGHS gives its own verdict


def scan_lines(lines: Iterable[str]) -> Optional[str]:
    """:func:`scan_mps` on an iterable of lines.

    >>> scan_lines(["ROWS", " N c", " E r0", "COLUMNS", " x c 1 r0 abc", "ENDATA"])
    "line 5: 'abc' is not a number"
    >>> scan_lines(["ROWS", " N c", " E r0", "COLUMNS", " x c 1 r1 2", "ENDATA"])
    "line 5: row 'r1' is not declared in ROWS"
    >>> scan_lines(["ROWS", " N c", " E r0", "COLUMNS", " x c 1 r0 2"])
    'line 5: the file ends before its ENDATA line (truncated?)'
    """
    section, rows, number, sections = None, set(), 0, 0
    for number, line in enumerate(lines, start=1):
        if not line.strip() or line.startswith(("*", "$")):
            continue
        if not line[0].isspace():
            words = line.split()
            header = " ".join(words[:2]).upper() if words[0].upper() == "OBJSENSE" else words[0].upper()
            section = header.split()[0] if header in _SECTIONS else None
            sections += section is not None
            if section == "ENDATA":
                return None
            continue
        tokens = line.split()
        problem = _line_problem(section, tokens, rows)
        if problem:
            return f"line {number}: {problem}"
    if not number:
        return "the file is empty"
    if not sections:
        return "no MPS section header (NAME, ROWS, COLUMNS, ...) found: not an MPS file"
    return f"line {number}: the file ends before its ENDATA line (truncated?)"


def _line_problem(section: Optional[str], tokens: list[str], rows: set) -> str:
    if section == "ROWS":
        if len(tokens) == 2:
            rows.add(tokens[1])
        return ""
    if section == "COLUMNS":
        if "'MARKER'" in tokens or len(tokens) not in (3, 5):
            return ""
        return _pairs_problem(tokens[1:], rows, finite=True)
    if section in ("RHS", "RANGES"):
        if len(tokens) in (3, 5):
            tokens = tokens[1:]
        elif len(tokens) not in (2, 4):
            return ""
        return _pairs_problem(tokens, rows, finite=False)
    if section == "BOUNDS" and tokens[0].upper() in _VALUED_BOUNDS and len(tokens) in (3, 4):
        return _number_problem(tokens[-1], finite=False)
    return ""


def _pairs_problem(tokens: list[str], rows: set, finite: bool) -> str:
    """(row, value) pairs: the row must be declared, the value a number."""
    for row, value in zip(tokens[::2], tokens[1::2]):
        if rows and row not in rows:
            return f"row {row!r} is not declared in ROWS"
        problem = _number_problem(value, finite)
        if problem:
            return problem
    return ""


def _number_problem(text: str, finite: bool) -> str:
    try:
        value = float(text)
    except ValueError:
        return f"{text!r} is not a number"
    if math.isnan(value):
        return f"{text!r} is NaN"
    if finite and math.isinf(value):
        return f"{text!r} is infinite (a coefficient or cost must be finite)"
    return ""
