"""Mixed-integer programs in standard form with slacks, and the completion of a decision.

The form (shapes: A (m, N), b (m,), c, upper, integer (N,))::

    minimise  c^T z + offset   subject to  A z = b,  0 <= z <= upper,  z_j integer for j in I

whose first ``n_decision`` columns are the *decision* (the user's variables, integer where the
model says so) and whose other columns are continuous *slacks*, one per inequality row, each a
singleton column (one entry +1 for a <= row, -1 for a >= row). :func:`from_inequalities` builds it
from ``a_i x <= b_i`` / ``a_i x >= b_i`` rows. The column bounds and the integrality are not
constraints rows: a row projection T A z = T b keeps them as they are.

**Completion** (:func:`rounded_decision`, then :func:`calib.reduce.completion.complete` on the
decision columns, the LP completion's closed form per row): a decision x (from the projected model, where the slacks are
aggregated into T's columns and mean nothing) is judged in the original by recomputing each slack
from its own row, s_i = (b_i - a_i x) / sigma_i with sigma_i the slack's entry, and keeping
s_i = 0 where that is negative (the row cannot be completed; its violation |b_i - a_i x| stays
in the residual A z - b, the point's feasibility error). Integer decision columns are rounded to
the nearest integer first (a MIP solver returns them within its integrality tolerance). Cost: one
product A_dec x, O(nonzeros of the decision columns). Rows without a slack (equalities) keep their
residual as it is.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.problems import DecisionMap, StandardLP


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


def from_inequalities(c, A, b, sense: str, upper, integer, name: str = "milp") -> StandardMILP:
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


def rounded_decision(problem: StandardMILP, z: np.ndarray) -> np.ndarray:
    """``z`` with its integer decision columns rounded to the nearest integer and every decision clipped to
    its bounds (a MIP solver returns integers within its integrality tolerance); the slacks are left as
    they are, for :func:`calib.reduce.completion.complete` to recompute. Shape (N,) -> (N,).

    >>> p = from_inequalities([-1.0, -1.0], [[1.0, 1.0], [1.0, 0.0]], [1.0, 2.0], "<=", [1.0, 1.0], [True, True])
    >>> rounded_decision(p, np.array([0.9999999, 1.2, 7.0, 7.0])).tolist()
    [1.0, 1.0, 7.0, 7.0]
    """
    out = np.asarray(z, dtype=float).copy()
    decision = out[:problem.n_decision]
    integer = problem.integer[:problem.n_decision]
    decision[integer] = np.round(decision[integer])
    out[:problem.n_decision] = np.clip(decision, 0.0, problem.upper[:problem.n_decision])
    return out


def violated_rows(problem: StandardMILP, z: np.ndarray, tolerance: float = 1e-9) -> float:
    """Share of the rows whose residual |a_i z - b_i| exceeds ``tolerance`` times max(1, |b_i|).

    >>> p = from_inequalities([-1.0, -1.0], [[1.0, 1.0], [1.0, 0.0]], [1.0, 2.0], "<=", [1.0, 1.0], [True, True])
    >>> violated_rows(p, np.array([1.0, 1.0, 0.0, 1.0]))
    0.5
    """
    return float(np.mean(np.abs(problem.residual(z)) > tolerance * np.maximum(1.0, np.abs(problem.b))))
