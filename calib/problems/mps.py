"""MPS files: the one module that reads them (and writes ours), for every part of calib.

An MPS file (IBM, "MPS file format"; free and fixed variants, optionally gzipped) holds a
general-form LP ``row_lo <= A x <= row_hi``, ``col_lo <= x <= col_hi``, min or max ``c^T x`` plus a
constant. Reading is two steps:

1. :func:`scan_mps`, a light check of the text that names the line of the mistakes HiGHS reports
   vaguely or not at all. HiGHS reads a number it cannot parse as 0 (``x0 r0 abc`` silently
   becomes a zero coefficient), takes ``nan`` as a cost, and answers a misspelt row name with a
   fixed-format parser error. The scan reads the file once, token by token in the free-MPS layout
   (the free variant HiGHS writes), and reports the first problem with its line number: a
   coefficient, right-hand side, range or bound that is not a number, or is NaN (anywhere) or
   infinite (in COLUMNS, where HiGHS refuses infinite entries); a row named in COLUMNS, RHS or
   RANGES that ROWS does not declare; a file that ends before its ENDATA line (a truncated file).
   Lines whose token count does not fit the free layout (fixed-format names holding spaces) are
   left to HiGHS, so the scan never refuses a file HiGHS would read correctly.
2. :func:`read_mps`: HiGHS's reader (highspy, used as a library) into a :class:`GeneralLP` of shape
   A (m, n) with the objective turned to minimisation; integer markers and quadratic objectives
   are refused (not an LP). :func:`read_mps_standard` is the one reading of a model file as a
   standard-form LP, with its decision columns from the structure
   (:meth:`GeneralLP.structural_decision`) or from a name prefix.

Both steps cost O(file size); converting to standard form adds O(nnz(A) + m + n).

Writing (:func:`mps_text`, the format saved instances use): free MPS, rows ``r0..``, columns
``x0..``, objective row ``cost``; every number in Python's shortest round-trip form, so HiGHS reads
back exactly the same doubles; the objective constant is the negated right-hand side of the
objective row (the MPS convention). HiGHS's own model limits apply on reading exactly as when
solving: matrix entries of magnitude <= 1e-9 are dropped, >= 1e15 refused (so the writer refuses
them), costs and right-hand sides of magnitude >= 1e20 count as infinite (refused too), and a cost
of -0.0 reads back as 0.0.
"""

from __future__ import annotations

import gzip
import math
import os
import re
import tempfile
from pathlib import Path
from typing import Iterable, Optional, Union

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.problems.arrays import INF_BOUND
from calib.problems.lp import GeneralLP, StandardLP

PathLike = Union[str, Path]
#: HiGHS refuses matrix entries of at least this magnitude (its ``large_matrix_value``).
HIGHS_LARGE_ENTRY = 1e15

# --- the scan ----------------------------------------------------------------------------------

#: bound types that carry a value (the others: FR, MI, PL, BV)
_VALUED_BOUNDS = {"UP", "LO", "FX", "LI", "UI", "SC"}
_SECTIONS = {"NAME", "ROWS", "COLUMNS", "RHS", "RANGES", "BOUNDS", "ENDATA", "OBJSENSE", "OBJSENSE MAX",
             "OBJSENSE MIN", "OBJSENSE MAXIMIZE", "OBJSENSE MINIMIZE", "OBJSECT", "QUADOBJ", "QMATRIX", "QSECTION",
             "QCMATRIX", "CSECTION", "SOS", "INDICATORS"}


def scan_mps(path: PathLike) -> Optional[str]:
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


# --- reading through HiGHS ---------------------------------------------------------------------

def _read_with_log(path: Path) -> tuple:
    """(Highs, read status, HiGHS's first ERROR line or "") of ``readModel(path)``."""
    # here, not at import: families and the light commands import this module without reading a file
    from calib.problems.highs_handle import quiet_highs

    handle, log_path = tempfile.mkstemp(prefix="calib-mps-", suffix=".log")
    os.close(handle)
    try:
        h = quiet_highs({"output_flag": True, "log_to_console": False, "log_file": log_path})
        status = h.readModel(str(path))
        h.setOptionValue("output_flag", False)
        h.setOptionValue("log_file", "")
        with open(log_path, encoding="utf-8", errors="replace") as log:
            errors = [line.split(":", 1)[1].strip() for line in log if line.startswith("ERROR:")]
    finally:
        os.unlink(log_path)
    return h, status, " ".join(errors[0].split()) if errors else ""


def read_mps(path: PathLike) -> GeneralLP:
    """Read an MPS file (also .mps.gz) with HiGHS into a :class:`GeneralLP` (A of shape (m, n)).

    Raises :class:`InputError` naming the file when it is missing, unreadable or malformed
    (:func:`scan_mps` first), or when it holds integer variables or a quadratic objective (not an LP).
    """
    import highspy  # here, not at import: the light commands import this module without reading a file

    path = Path(path)
    if not path.is_file():
        raise InputError(str(path), "no such file", "check the path to the MPS file")
    problem = scan_mps(path)
    if problem:
        raise InputError(str(path), problem, "correct the file: numbers finite, every row declared under ROWS, ENDATA last")
    h, status, complaint = _read_with_log(path)
    if status == highspy.HighsStatus.kError:
        raise InputError(str(path), f"HiGHS could not read this MPS file{': ' + complaint if complaint else ''}",
                         "check that it is a complete, valid (free or fixed) MPS file")
    lp = h.getLp()
    if lp.num_row_ == 0 or lp.num_col_ == 0:
        raise InputError(str(path), "the model has no rows or no columns", "an LP needs constraints and variables")
    if len(lp.integrality_) and np.any(np.asarray([int(t) for t in lp.integrality_]) != 0):
        raise InputError(str(path), "the model has integer variables", "calib handles continuous LPs: drop the integrality markers")
    if h.getModel().hessian_.dim_ > 0:
        raise InputError(str(path), "the model has a quadratic objective", "read it as a QP instead of an LP")
    a = lp.a_matrix_
    A = sp.csc_array((np.asarray(a.value_), np.asarray(a.index_), np.asarray(a.start_)), shape=(lp.num_row_, lp.num_col_))
    sense = 1.0 if lp.sense_ == highspy.ObjSense.kMinimize else -1.0
    general = GeneralLP(
        c=sense * np.asarray(lp.col_cost_), A=A,
        row_lo=np.asarray(lp.row_lower_), row_hi=np.asarray(lp.row_upper_),
        col_lo=np.asarray(lp.col_lower_), col_hi=np.asarray(lp.col_upper_),
        offset=sense * float(lp.offset_), name=path.name,
        col_names=tuple(lp.col_names_) if len(lp.col_names_) == lp.num_col_ else None,
    )
    return general.validate()


def read_mps_standard(path: PathLike, decision_prefix: Optional[str] = None) -> StandardLP:
    """An MPS file's standard form with its decision from the structure (:meth:`GeneralLP.structural_decision`),
    or the columns whose names start with ``decision_prefix``: the one reading of a model file as an LP."""
    general = read_mps(path)
    return general.to_standard(decision=general.structural_decision(decision_prefix)).lp


# --- writing -----------------------------------------------------------------------------------

def _num(value: float) -> str:
    return repr(float(value))


def mps_text(lp: StandardLP) -> str:
    """Free-MPS text of min c^T x + offset, A x = b, x >= 0 (validated first; module docstring).

    >>> print(mps_text(StandardLP(c=[1.0, 0.0], A=[[2.0, 3.0]], b=[4.0], offset=0.5, name="tiny")), end="")
    NAME tiny
    ROWS
     N cost
     E r0
    COLUMNS
     x0 cost 1.0
     x0 r0 2.0
     x1 r0 3.0
    RHS
     rhs r0 4.0
     rhs cost -0.5
    ENDATA
    """
    lp.validate()
    A = sp.csc_array(lp.A)
    A.sum_duplicates()
    A.eliminate_zeros()
    _within_highs_limits(lp, A)
    title = re.sub(r"\s+", "_", lp.name.strip()) or "lp"
    lines = [f"NAME {title}", "ROWS", " N cost"]
    lines += [f" E r{i}" for i in range(lp.n_rows)]
    lines.append("COLUMNS")
    for j in range(lp.n_cols):
        start, stop = A.indptr[j], A.indptr[j + 1]
        if lp.c[j] != 0 or start == stop:  # an empty column is declared by its cost
            lines.append(f" x{j} cost {_num(lp.c[j])}")
        lines += [f" x{j} r{i} {_num(v)}" for i, v in zip(A.indices[start:stop], A.data[start:stop])]
    lines.append("RHS")
    lines += [f" rhs r{i} {_num(v)}" for i, v in enumerate(lp.b) if v != 0 or np.signbit(v)]
    if lp.offset != 0:
        lines.append(f" rhs cost {_num(-lp.offset)}")
    lines.append("ENDATA")
    return "\n".join(lines) + "\n"


def _within_highs_limits(lp: StandardLP, A: sp.csc_array) -> None:
    if A.nnz and np.abs(A.data).max() >= HIGHS_LARGE_ENTRY:
        raise InputError(lp.name, f"a matrix entry reaches {HIGHS_LARGE_ENTRY:g} in magnitude, which HiGHS refuses", "rescale the rows or columns")
    for label, values in (("costs", lp.c), ("right-hand sides", lp.b), ("offset", np.array([lp.offset]))):
        if np.abs(values).max(initial=0.0) >= INF_BOUND:
            raise InputError(lp.name, f"{label} reach {INF_BOUND:g} in magnitude, which HiGHS reads as infinite", "rescale the problem")
