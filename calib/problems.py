"""Problem containers and their canonical forms.

The LP standard form used everywhere is::

    minimise  c^T x + offset   subject to  A x = b,  x >= 0

with ``A`` of shape (m, n) (dense ndarray or scipy.sparse), ``b`` of shape (m,), ``c`` of shape (n,).
A general-form LP (row bounds, column bounds, free variables) becomes standard form through
:meth:`GeneralLP.to_standard`, which adds slacks and splits free variables and keeps a linear map
that takes a standard-form point back to the original variables. Infinities are normalised here,
in one place: any bound with magnitude >= 1e20 counts as infinite (the HiGHS convention).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Union

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError

Matrix = Union[np.ndarray, sp.spmatrix, sp.sparray]

#: Bounds at or beyond this magnitude are infinite (HiGHS uses the same threshold).
INF_BOUND = 1e20


def _finite_or_inf(values: np.ndarray) -> np.ndarray:
    values = np.asarray(values, dtype=float).copy()
    values[values >= INF_BOUND] = np.inf
    values[values <= -INF_BOUND] = -np.inf
    return values


def as_matrix(A) -> "Matrix":
    """Float CSR for sparse input, a 2-D float ndarray otherwise (the one coercion of constraint matrices)."""
    return sp.csr_array(A, dtype=float) if sp.issparse(A) else np.atleast_2d(np.asarray(A, dtype=float))


def _check_finite(name: str, where: str, values) -> None:
    data = values.data if sp.issparse(values) else np.asarray(values)
    if not np.all(np.isfinite(data)):
        raise InputError(where, f"{name} contains NaN or infinite entries", "replace them with finite numbers")


@dataclass
class StandardLP:
    """min c^T x + offset s.t. A x = b, x >= 0.

    Attributes
    ----------
    c : ndarray, shape (n,)
    A : ndarray or scipy.sparse CSR, shape (m, n)
    b : ndarray, shape (m,)
    offset : float
        Constant added to the objective (kept so values compare with published optima).
    name : str
    """

    c: np.ndarray
    A: Matrix
    b: np.ndarray
    offset: float = 0.0
    name: str = "lp"

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        self.b = np.asarray(self.b, dtype=float).ravel()
        self.A = as_matrix(self.A)

    @property
    def n_rows(self) -> int:
        return self.A.shape[0]

    @property
    def n_cols(self) -> int:
        return self.A.shape[1]

    def validate(self) -> "StandardLP":
        """Check shapes and finiteness; raise :class:`InputError` naming the problem."""
        m, n = self.A.shape
        if m == 0 or n == 0:
            raise InputError(self.name, f"empty constraint matrix of shape {self.A.shape}", "an LP needs at least one row and one column")
        if self.b.shape != (m,):
            raise InputError(self.name, f"b has shape {self.b.shape} but A has {m} rows", "give one right-hand side per row")
        if self.c.shape != (n,):
            raise InputError(self.name, f"c has shape {self.c.shape} but A has {n} columns", "give one cost per column")
        for label, values in (("A", self.A), ("b", self.b), ("c", self.c)):
            _check_finite(label, self.name, values)
        if not np.isfinite(self.offset):
            raise InputError(self.name, "objective offset is not finite", "use a finite constant")
        return self

    def objective(self, x: np.ndarray) -> float:
        """c^T x + offset."""
        return float(self.c @ x + self.offset)

    def residual(self, x: np.ndarray) -> np.ndarray:
        """A x - b, shape (m,)."""
        return np.asarray(self.A @ x).ravel() - self.b


@dataclass
class GeneralLP:
    """min c^T x + offset s.t. row_lo <= A x <= row_hi, col_lo <= x <= col_hi.

    Infinite bounds are +-inf (or magnitude >= 1e20). Shapes: A (m, n); row bounds (m,);
    c and column bounds (n,).
    """

    c: np.ndarray
    A: Matrix
    row_lo: np.ndarray
    row_hi: np.ndarray
    col_lo: np.ndarray
    col_hi: np.ndarray
    offset: float = 0.0
    name: str = "lp"

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        self.A = sp.csr_array(self.A, dtype=float)
        self.row_lo, self.row_hi = _finite_or_inf(self.row_lo), _finite_or_inf(self.row_hi)
        self.col_lo, self.col_hi = _finite_or_inf(self.col_lo), _finite_or_inf(self.col_hi)

    def validate(self) -> "GeneralLP":
        m, n = self.A.shape
        if m == 0 or n == 0:
            raise InputError(self.name, f"empty constraint matrix of shape {self.A.shape}", "an LP needs at least one row and one column")
        for label, values, size in (("c", self.c, n), ("column lower bounds", self.col_lo, n),
                                    ("column upper bounds", self.col_hi, n), ("row lower bounds", self.row_lo, m),
                                    ("row upper bounds", self.row_hi, m)):
            if values.shape != (size,):
                raise InputError(self.name, f"{label} have shape {values.shape}, expected ({size},)", "make the shapes agree with A")
            if np.isnan(values).any():
                raise InputError(self.name, f"{label} contain NaN", "replace NaN by a number or an infinite bound")
        _check_finite("A", self.name, self.A)
        _check_finite("c", self.name, self.c)
        if np.any(self.row_lo > self.row_hi) or np.any(self.col_lo > self.col_hi):
            raise InputError(self.name, "a lower bound exceeds its upper bound", "fix the crossed bounds (the model is trivially infeasible)")
        return self

    def to_standard(self) -> "StandardForm":
        """Convert to standard form with slacks and split free variables.

        Columns: x_j = lo_j + x'_j (lower bound finite), x_j = hi_j - x'_j (only upper finite) or
        x_j = x+_j - x-_j (free); a finite upper bound on a lower-bounded column becomes the row
        x'_j + s_j = hi_j - lo_j. Rows: equalities stay; lo <= a x adds a surplus, a x <= hi a
        slack; ranged rows become two rows; rows free on both sides are dropped.
        """
        self.validate()
        m, n = self.A.shape
        lo, hi = self.col_lo, self.col_hi
        shift = np.where(np.isfinite(lo), lo, np.where(np.isfinite(hi), hi, 0.0))
        sign = np.where(np.isfinite(lo) | ~np.isfinite(hi), 1.0, -1.0)
        free = ~np.isfinite(lo) & ~np.isfinite(hi)
        # recover: x = shift + M z, with z the standard-form variables.
        free_idx = np.flatnonzero(free)
        n_std_vars = n + free_idx.size
        M = sp.hstack([sp.diags_array(sign), sp.csr_array((-np.ones(free_idx.size), (free_idx, np.arange(free_idx.size))), shape=(n, free_idx.size))]).tocsr()
        A_var = (self.A @ M).tocsr()  # rows expressed in z
        c_var = M.T @ self.c
        offset = self.offset + float(self.c @ shift)
        row_shift = self.A @ shift

        blocks, rhs, slack_signs = [], [], []
        r_lo, r_hi = self.row_lo - row_shift, self.row_hi - row_shift
        eq = np.isfinite(r_lo) & np.isfinite(r_hi) & (r_lo == r_hi)
        has_lo = np.isfinite(r_lo) & ~eq
        has_hi = np.isfinite(r_hi) & ~eq
        for mask, bound, slack in ((eq, r_lo, 0.0), (has_lo, r_lo, -1.0), (has_hi, r_hi, 1.0)):
            idx = np.flatnonzero(mask)
            blocks.append(A_var[idx])
            rhs.append(bound[idx])
            slack_signs.append(np.full(idx.size, slack))
        # finite upper bounds on shifted lower-bounded columns: z_j + s = hi - lo
        boxed = np.flatnonzero(np.isfinite(lo) & np.isfinite(hi))
        blocks.append(sp.csr_array((np.ones(boxed.size), (np.arange(boxed.size), boxed)), shape=(boxed.size, n_std_vars)))
        rhs.append(hi[boxed] - lo[boxed])
        slack_signs.append(np.ones(boxed.size))

        A_rows = sp.vstack(blocks).tocsr()
        b = np.concatenate(rhs)
        signs = np.concatenate(slack_signs)
        with_slack = np.flatnonzero(signs != 0)
        S = sp.csr_array((signs[with_slack], (with_slack, np.arange(with_slack.size))), shape=(A_rows.shape[0], with_slack.size))
        A_std = sp.hstack([A_rows, S]).tocsr()
        c_std = np.concatenate([c_var, np.zeros(with_slack.size)])
        recover = sp.hstack([M, sp.csr_array((n, with_slack.size))]).tocsr()
        lp = StandardLP(c=c_std, A=A_std, b=b, offset=offset, name=self.name)
        return StandardForm(lp=lp, recover=recover, shift=shift)


@dataclass
class StandardForm:
    """A standard-form LP with the map back to the general-form variables: x = shift + recover @ z."""

    lp: StandardLP
    recover: sp.csr_array
    shift: np.ndarray = field(repr=False)

    def original_point(self, z: np.ndarray) -> np.ndarray:
        return self.shift + self.recover @ z

    def standard_point(self, x: np.ndarray) -> np.ndarray:
        """The standard-form point z (with its slacks) of an original point x; needs no free column.

        Inverse of :meth:`original_point` on points that satisfy the original rows; shape (n_std,).
        """
        n_orig = self.recover.shape[0]
        sign = self.recover[:, :n_orig].diagonal()
        if self.recover[:, n_orig:].count_nonzero():
            raise ValueError("standard_point needs a model without free columns")
        structural = sign * (np.asarray(x, dtype=float) - self.shift)
        A = self.lp.A
        rest = self.lp.b - A[:, :n_orig] @ structural
        slack_columns = A[:, n_orig:]
        # each slack column holds one +-1 entry, so S^T r recovers the slack values
        return np.concatenate([structural, slack_columns.T @ rest])


def _read_with_log(path: Path) -> tuple:
    """(Highs, read status, HiGHS's first ERROR line or "") of ``readModel(path)``."""
    import os
    import tempfile

    from calib.solvers.highs import new_highs

    handle, log_path = tempfile.mkstemp(prefix="calib-mps-", suffix=".log")
    os.close(handle)
    try:
        h = new_highs({"output_flag": True, "log_to_console": False, "log_file": log_path})
        status = h.readModel(str(path))
        h.setOptionValue("output_flag", False)
        h.setOptionValue("log_file", "")
        with open(log_path, encoding="utf-8", errors="replace") as log:
            errors = [line.split(":", 1)[1].strip() for line in log if line.startswith("ERROR:")]
    finally:
        os.unlink(log_path)
    return h, status, " ".join(errors[0].split()) if errors else ""


def read_mps(path: Union[str, Path]) -> GeneralLP:
    """Read an MPS file (also .mps.gz) with HiGHS into a :class:`GeneralLP`.

    Raises :class:`InputError` naming the file when it is missing, unreadable or malformed, or
    when it holds integer variables or a quadratic objective (not an LP).
    """
    import highspy

    from calib.mps_scan import scan_mps

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
    )
    return general.validate()
