"""Mixed-integer programs in standard form with one singleton slack per inequality row.

The form (shapes: A (m, N), b (m,), c, upper, integer (N,))::

    minimise  c^T z + offset   subject to  A z = b,  0 <= z <= upper,  z_j integer for j in I

whose first ``n_decision`` columns are the *decision* (the user's variables, integer where the
model says so) and whose other columns are continuous *slacks*, one per inequality row, each a
singleton column (one entry +1 for a <= row, -1 for a >= row). :func:`from_inequalities` builds it
from ``a_i x <= b_i`` / ``a_i x >= b_i`` rows. The column bounds and the integrality are not
constraints rows: a row projection T A z = T b keeps them as they are.

**Which points the JL bounds count**: as for an LP (:attr:`calib.problems.lp.StandardLP.jl_points`):
the N columns of A (decisions and slacks) and b, N + 1 points; bounds and integrality are not rows,
so a row projection leaves them as they are. The completion of a projected decision (integers
rounded, slacks recomputed row by row) is :mod:`calib.reduce.milp`.

Costs: :func:`from_inequalities` is O(nnz(A) + m) (one sparse stacking); :meth:`StandardMILP.validate`
O(nnz(A) + N).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike

from calib.errors import InputError
from calib.problems.lp import DecisionMap, StandardLP


@dataclass
class StandardMILP(StandardLP):
    """min c^T z + offset s.t. A z = b, 0 <= z <= upper, z_j integer where ``integer`` (module docstring).

    The LP fields (``c`` (N,), ``A`` (m, N), ``b`` (m,), ``offset``, ``name``) with:

    Attributes
    ----------
    upper : ndarray (N,)
        Column upper bounds (``inf`` for none).
    integer : ndarray of bool (N,)
        Integer columns (decisions only).
    n_decision : int
        The first ``n_decision`` columns are the decision; the rest are singleton slack columns.
    """

    upper: np.ndarray = None
    integer: np.ndarray = None
    n_decision: int = 0

    #: how this kind counts n (the JL points, as for an LP) and m, as ``calib families`` shows it
    COUNTING: ClassVar[str] = ("n = the columns of the standard form's A (decisions and slacks) plus b (cols + 1), as for "
                               "an LP; m = its rows, reduced to k (bounds and integrality are kept)")

    def __post_init__(self) -> None:
        super().__post_init__()
        self.upper = np.asarray(self.upper, dtype=float).ravel()
        self.integer = np.asarray(self.integer, dtype=bool).ravel()
        if self.decision is None and self.n_decision:
            self.decision = DecisionMap.select(self.n_cols, np.arange(self.n_decision))

    def validate(self) -> "StandardMILP":
        """The LP's checks, then the bounds and that integrality sits on decision columns."""
        super().validate()
        n = self.n_cols
        for label, values in (("upper", self.upper), ("integer", self.integer)):
            if values.shape != (n,):
                raise InputError(self.name, f"{label} has shape {values.shape}, expected ({n},)", "one per column of A")
        if np.any(self.upper < 0) or np.isnan(self.upper).any():
            raise InputError(self.name, "an upper bound is negative or NaN", "columns range over [0, upper]")
        if not 0 < self.n_decision <= n or self.integer[self.n_decision:].any():
            raise InputError(self.name, f"{self.n_decision} decision columns of {n}, integers among the slacks",
                             "decision columns first, then continuous slacks")
        return self


def from_inequalities(c: ArrayLike, A: ArrayLike, b: ArrayLike, sense: str, upper: ArrayLike, integer: ArrayLike,
                      name: str = "milp") -> StandardMILP:
    """The standard form of min c^T x s.t. a_i x <= b_i (``sense`` "<=") or >= b_i (">="), 0 <= x <= upper.

    One slack column per row: +1 for "<=", -1 for ">=" (a surplus), continuous and unbounded above.

    >>> p = from_inequalities([-1.0, -2.0], [[1.0, 1.0]], [1.0], "<=", [1.0, 1.0], [True, True])
    >>> p.A.toarray().tolist(), p.n_decision, p.upper.tolist()
    ([[1.0, 1.0, 1.0]], 2, [1.0, 1.0, inf])
    """
    if sense not in ("<=", ">="):
        raise ValueError(f"sense must be '<=' or '>=', got {sense!r}")
    A = sp.csr_array(A, dtype=float)
    m, n = A.shape
    slacks = sp.identity(m, format="csr") * (1.0 if sense == "<=" else -1.0)
    return StandardMILP(c=np.concatenate([np.asarray(c, dtype=float), np.zeros(m)]), A=sp.hstack([A, slacks]).tocsr(),
                        b=b, upper=np.concatenate([np.asarray(upper, dtype=float), np.full(m, np.inf)]),
                        integer=np.concatenate([np.asarray(integer, dtype=bool), np.zeros(m, dtype=bool)]),
                        n_decision=n, name=name).validate()
