"""Linear programs: the standard form every LP is solved and projected in, the general form models
are written in, and the user's decision columns.

The LP standard form used everywhere is::

    minimise  c^T x + offset   subject to  A x = b,  x >= 0

with ``A`` of shape (m, n) (dense ndarray or scipy.sparse CSR), ``b`` of shape (m,), ``c`` of shape
(n,), all unitless unless a family says otherwise. A general-form LP (row bounds, column bounds,
free variables) becomes standard form through :meth:`GeneralLP.to_standard`, which adds slacks and
splits free variables and keeps a linear map that takes a standard-form point back to the original
variables; its cost is O(nnz(A) + m + n) (sparse stacking, no dense step). Infinities are
normalised in :mod:`calib.problems.arrays`: any bound with magnitude >= 1e20 counts as infinite
(the HiGHS convention). MPS files are read into a :class:`GeneralLP` by :mod:`calib.problems.mps`.

Which points the JL bounds count
--------------------------------
A row projection T (k x m) replaces A x = b by (T A) x = T b. It keeps the LP's geometry when it
keeps the inner products of the n columns of A and the right-hand side b with each other, so the
Johnson–Lindenstrauss count is n + 1 points (:attr:`StandardLP.jl_points`; zero columns included:
they are points too). This is the choice of K. Vu, P.-L. Poirion and L. Liberti, "Random
projections for linear programming", Mathematics of Operations Research 43(4):1051–1071, 2018
(they project the columns of A together with b; from memory).

Decision and completion columns
-------------------------------
The columns of a standard-form LP are of two sorts. The *decision* columns carry what a user takes
from a solution (regression coefficients, food servings, flows, a signal); the *completion* columns
(residual pairs, slacks and surpluses, the columns that occur in one row only) are fixed by the
decision: once the decision part x_D is chosen, the best completion solves

    minimise  c_C^T x_C   subject to   A_C x_C = b - A_D x_D,   x_C >= 0,

which for columns that occur in one row each splits into one closed form per row
(:mod:`calib.reduce.completion`). A :class:`DecisionMap` on the LP names the decision: the user's
variables d = shift + M x (M of shape (p, n), sparse), its decision columns being the columns of M
with a nonzero. Families declare it; an LP without one gets it from its structure
(:func:`decision_of`: every column that occurs in two rows or more is a decision column).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import ClassVar, Optional

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike

from calib.errors import InputError
from calib.problems.arrays import Matrix, as_matrix, check_finite, finite_or_inf


@dataclass(eq=False)
class DecisionMap:
    """The user's decision variables of a standard-form point x: d = shift + matrix @ x.

    Attributes
    ----------
    matrix : scipy.sparse CSR, shape (p, n)
        Row i combines the standard-form columns behind decision variable i (one column for a
        nonnegative variable, +1 and -1 for the two parts of a free one).
    shift : ndarray, shape (p,)
        The constant part (a shifted lower bound), 0 by default.
    names : tuple of str, optional
        The decision variables' names (from an MPS file), length p.
    """

    matrix: sp.csr_array
    shift: np.ndarray = None
    names: Optional[tuple] = None

    def __post_init__(self) -> None:
        self.matrix = sp.csr_array(self.matrix, dtype=float)
        self.shift = np.zeros(self.matrix.shape[0]) if self.shift is None else np.asarray(self.shift, dtype=float).ravel()

    @classmethod
    def select(cls, n_cols: int, columns: ArrayLike, names: Optional[tuple] = None) -> "DecisionMap":
        """The decision variables x[columns] themselves (a selection of the standard-form columns).

        >>> DecisionMap.select(4, [0, 2]).columns.tolist()
        [0, 2]
        """
        columns = np.asarray(columns, dtype=int)
        pick = sp.csr_array((np.ones(columns.size), (np.arange(columns.size), columns)), shape=(columns.size, n_cols))
        return cls(pick, names=names)

    @property
    def columns(self) -> np.ndarray:
        """Indices of the decision columns (sorted): the columns of ``matrix`` with a nonzero."""
        return np.flatnonzero(np.diff(sp.csc_array(self.matrix).indptr) > 0)

    def of(self, x: np.ndarray) -> np.ndarray:
        """The decision variables d = shift + matrix @ x of a standard-form point x (shape (n,) -> (p,)).

        >>> DecisionMap(sp.csr_array(np.array([[1.0, -1.0, 0.0]]))).of(np.array([0.0, 2.5, 7.0])).tolist()
        [-2.5]
        """
        return self.shift + np.asarray(self.matrix @ x).ravel()


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
    decision : DecisionMap, optional
        The user's decision variables (module docstring); None: derived from the structure by
        :func:`decision_of`.
    """

    c: np.ndarray
    A: Matrix
    b: np.ndarray
    offset: float = 0.0
    name: str = "lp"
    decision: Optional[DecisionMap] = None

    #: how this kind counts n (the JL points) and m (the projected dimension), as ``calib families`` shows it
    COUNTING: ClassVar[str] = ("n = the columns of the standard form's A plus b (cols + 1), the points a row projection "
                               "T A, T b must keep; m = the rows of A (its equality constraints), reduced to k")

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        self.b = np.asarray(self.b, dtype=float).ravel()
        self.A = as_matrix(self.A)

    @property
    def n_rows(self) -> int:
        """Number of equality rows m (the dimension a row projection reduces to k)."""
        return self.A.shape[0]

    @property
    def n_cols(self) -> int:
        """Number of standard-form columns n (slacks and split free variables included)."""
        return self.A.shape[1]

    @staticmethod
    def jl_points_for(n_cols: int) -> int:
        """JL points of a row projection of an LP with ``n_cols`` standard-form columns: the columns
        of A and b, n + 1 (module docstring), for counting from a family's sizes before building.

        >>> StandardLP.jl_points_for(80)
        81
        """
        return int(n_cols) + 1

    @property
    def jl_points(self) -> int:
        """Points a row projection T A x = T b must keep: the n columns of A and b, n + 1.

        >>> StandardLP(c=[1.0, 0.0, 2.0], A=[[1.0, 1.0, 0.0]], b=[1.0]).jl_points
        4
        """
        return self.jl_points_for(self.n_cols)

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
            check_finite(label, self.name, values)
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
    c and column bounds (n,); ``col_names`` (n,) when the model named its columns (an MPS file).
    """

    c: np.ndarray
    A: Matrix
    row_lo: np.ndarray
    row_hi: np.ndarray
    col_lo: np.ndarray
    col_hi: np.ndarray
    offset: float = 0.0
    name: str = "lp"
    col_names: Optional[tuple] = None

    def __post_init__(self) -> None:
        self.c = np.asarray(self.c, dtype=float).ravel()
        self.A = sp.csr_array(self.A, dtype=float)
        self.row_lo, self.row_hi = finite_or_inf(self.row_lo), finite_or_inf(self.row_hi)
        self.col_lo, self.col_hi = finite_or_inf(self.col_lo), finite_or_inf(self.col_hi)

    def validate(self) -> "GeneralLP":
        """Check shapes, NaN, finiteness of A and c, and uncrossed bounds; raise :class:`InputError` naming the problem."""
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
        check_finite("A", self.name, self.A)
        check_finite("c", self.name, self.c)
        if np.any(self.row_lo > self.row_hi) or np.any(self.col_lo > self.col_hi):
            raise InputError(self.name, "a lower bound exceeds its upper bound", "fix the crossed bounds (the model is trivially infeasible)")
        return self

    def to_standard(self, decision: Optional[ArrayLike] = None) -> "StandardForm":
        """Convert to standard form with slacks and split free variables.

        Columns: x_j = lo_j + x'_j (lower bound finite), x_j = hi_j - x'_j (only upper finite) or
        x_j = x+_j - x-_j (free); a finite upper bound on a lower-bounded column becomes the row
        x'_j + s_j = hi_j - lo_j. Rows: equalities stay; lo <= a x adds a surplus, a x <= hi a
        slack; ranged rows become two rows; rows free on both sides are dropped.

        ``decision``: indices of the general-form columns that are the user's decision (all of
        them by default); the standard form's :class:`DecisionMap` gives those variables, so the
        slacks, surpluses and the other columns are completion columns.
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
        chosen = np.arange(n) if decision is None else np.asarray(decision, dtype=int)
        names = None if self.col_names is None else tuple(self.col_names[j] for j in chosen)
        lp = StandardLP(c=c_std, A=A_std, b=b, offset=offset, name=self.name,
                        decision=DecisionMap(recover[chosen], shift[chosen], names))
        return StandardForm(lp=lp, recover=recover, shift=shift)

    def structural_decision(self, prefix: Optional[str] = None) -> np.ndarray:
        """Decision columns of a model that declares none: with ``prefix``, the columns whose name
        starts with it; otherwise every column that occurs in two rows or more of the standard form:
        in two rows of A, or in one and boxed (both bounds finite: its bound row is the second). A
        column in a single row is determined by the others through that row.

        >>> general = GeneralLP(c=[1.0, 0.0, 0.0], A=[[1.0, 1.0, 0.0], [1.0, 0.0, 1.0]], row_lo=[1.0, 0.0],
        ...                     row_hi=[1.0, 5.0], col_lo=[0.0, 0.0, 0.0], col_hi=[np.inf, np.inf, 3.0])
        >>> general.structural_decision().tolist()
        [0, 2]
        """
        if prefix is not None:
            names = self.col_names or ()
            return np.asarray([j for j, name in enumerate(names) if str(name).startswith(prefix)], dtype=int)
        rows_per_column = np.diff(sp.csc_array(self.A).indptr)
        boxed = np.isfinite(self.col_lo) & np.isfinite(self.col_hi)
        return np.flatnonzero(rows_per_column + boxed >= 2)


def singleton_columns(A: Matrix) -> np.ndarray:
    """Boolean mask (n,): the columns of A with exactly one nonzero entry.

    >>> singleton_columns(np.array([[1.0, 2.0, 0.0], [0.0, 3.0, 0.0]])).tolist()
    [True, False, False]
    """
    if sp.issparse(A):
        counts = np.diff(sp.csc_array(A).indptr)
        data = sp.csc_array(A).data
        if data.size and np.any(data == 0):  # explicit zeros do not count
            counts = np.diff(sp.csc_array(sp.csc_array(A) != 0).indptr)
    else:
        counts = np.count_nonzero(np.asarray(A), axis=0)
    return counts == 1


def decision_of(lp: StandardLP) -> DecisionMap:
    """The LP's declared :class:`DecisionMap`, else the one its structure implies: every column that
    occurs in two rows or more is a decision column, the singletons are its completion.

    >>> decision_of(StandardLP(c=[1.0, 0.0], A=[[1.0, 1.0], [2.0, 0.0]], b=[1.0, 2.0])).columns.tolist()
    [0]
    """
    if lp.decision is not None:
        return lp.decision
    return DecisionMap.select(lp.n_cols, np.flatnonzero(~singleton_columns(lp.A)))


@dataclass
class StandardForm:
    """A standard-form LP with the map back to the general-form variables: x = shift + recover @ z."""

    lp: StandardLP
    recover: sp.csr_array
    shift: np.ndarray = field(repr=False)

    def original_point(self, z: np.ndarray) -> np.ndarray:
        """The general-form point x = shift + recover @ z of a standard-form point z (shape (n_std,) -> (n,))."""
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
