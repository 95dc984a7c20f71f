"""Completion: keep the user's decision from a projected LP solution and solve for the rest exactly.

A row projection mixes the rows of min c^T x, A x = b, x >= 0, so the projected optimum x' knows
nothing row by row: the columns whose values a single row fixes (residual pairs of a regression,
slacks and surpluses, the columns occurring in one row) are meaningless in x' even when its
decision part is good. Split the columns into decision columns D and completion columns C
(:class:`calib.problems.lp.DecisionMap`, :func:`calib.problems.lp.decision_of`). The completion keeps
x_D = x'_D and solves

    minimise  c_C^T x_C   subject to   A_C x_C = r,   x_C >= 0,   r = b - A_D x'_D    (shape (m,))

exactly, then the point (x'_D, x_C) is judged in the original problem.

``rows`` (every completion column occurs in one row)
    The LP splits into one problem per row i: minimise sum_j c_j x_j over the row's columns subject
    to sum_j a_ij x_j = r_i, x_j >= 0. With r_i > 0 the optimum puts x_j = r_i / a_ij on the column
    of least c_j / a_ij among a_ij > 0; with r_i < 0 the same among a_ij < 0; r_i = 0 leaves the
    row's columns at 0. (A bounded original admits no pair a_p > 0 > a_q with c_p / a_p +
    c_q / |a_q| < 0: that pair would be a ray of the original.) Cost O(nnz(A)): one residual and
    one sort of the completion entries. Quantile regression: u_i = max(r_i, 0), v_i = max(-r_i, 0);
    a covering row A x - s = r: s_i = (A x)_i - r_i when that is >= 0.
``lp``
    Otherwise the restricted LP above, solved by HiGHS. When it is infeasible, the completion that
    violates the rows least in the 1-norm (min 1^T (p + q) s.t. A_C x_C + p - q = r, x_C, p, q >= 0)
    is taken instead, and the point is judged as it is.
``none``
    No completion columns (basis pursuit's signal is all decision): the point is x'.

A row that no completion can satisfy keeps its residual (the ``rows`` rule sets its columns to 0,
which violates the row least): the point is never repaired by solving the original, so a projected
decision that misses the original's rows is visible as a feasibility error, and its share of rows is
:func:`unmet_share`. A diet LP whose projected optimum is x = 0 completes to s = -r < 0 on every row
with a positive requirement: every such row is unmet.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
import scipy.sparse as sp

from calib.problems.lp import DecisionMap, StandardLP

#: a row counts as met when its residual is at most this share of the size of its terms, |a_i| |x| + |b_i|
ROW_RTOL = 1e-7


@dataclass
class Completion:
    """A completed point (shape (n,)), the rule that completed it (``rows``, ``lp`` or ``none``) and
    the simplex iterations of the restricted LPs it solved (0 for the closed form)."""

    x: np.ndarray
    method: str
    iterations: int = 0


def unmet_share(lp: StandardLP, x: np.ndarray) -> float:
    """Share of the rows of A x = b that x misses by more than ROW_RTOL of the row's term size.

    >>> lp = StandardLP(c=[0.0, 0.0], A=[[1.0, 0.0], [0.0, 1.0]], b=[1.0, 1.0])
    >>> unmet_share(lp, np.array([1.0, 0.5]))
    0.5
    """
    terms = np.asarray(abs(lp.A) @ np.abs(x)).ravel() + np.abs(lp.b)
    return float(np.mean(np.abs(lp.residual(x)) > ROW_RTOL * terms))


def _completion_block(lp: StandardLP, columns: np.ndarray) -> sp.csc_array:
    """The columns ``columns`` of A as CSC without explicit zeros, shape (m, len(columns))."""
    block = sp.csc_array(lp.A[:, columns] if sp.issparse(lp.A) else np.asarray(lp.A)[:, columns])
    block.eliminate_zeros()
    return block


def _best_per_row(rows: np.ndarray, ratios: np.ndarray, m: int) -> np.ndarray:
    """For each of m rows, the position (into ``rows``) of its least ratio; -1 for a row without entries."""
    best = np.full(m, -1)
    if rows.size:
        order = np.lexsort((ratios, rows))
        first_rows, first = np.unique(rows[order], return_index=True)
        best[first_rows] = order[first]
    return best


def complete_by_rows(block: sp.csc_array, costs: np.ndarray, residual: np.ndarray) -> np.ndarray:
    """The closed-form completion of the module docstring for singleton columns.

    ``block``: the completion columns of A, shape (m, |C|), one nonzero each; ``costs`` (|C|,);
    ``residual`` r (m,). Returns x_C of shape (|C|,).

    >>> block = sp.csc_array(np.array([[1.0, -1.0, 0.0], [0.0, 0.0, -1.0]]))
    >>> complete_by_rows(block, np.array([0.5, 0.5, 0.0]), np.array([-2.0, 3.0])).tolist()
    [0.0, 2.0, 0.0]
    """
    rows, coefficients = block.indices, block.data
    entry_column = np.repeat(np.arange(block.shape[1]), np.diff(block.indptr))
    ratios = costs[entry_column] / np.abs(coefficients)
    values = np.zeros(block.shape[1])
    for sign, needs in ((1.0, residual > 0), (-1.0, residual < 0)):
        usable = np.flatnonzero(np.sign(coefficients) == sign)
        best = _best_per_row(rows[usable], ratios[usable], block.shape[0])
        served = np.flatnonzero(needs & (best >= 0))
        entries = usable[best[served]]
        values[entry_column[entries]] = residual[served] / coefficients[entries]
    return values


def _restricted_lp(block: sp.csc_array, costs: np.ndarray, residual: np.ndarray, time_limit: float,
                   options: Optional[dict]) -> tuple[np.ndarray, int]:
    """The completion LP (or, when infeasible, its least-violation version): (x_C, simplex iterations)."""
    from calib.solvers.highs import solve_lp  # lazy: the closed form needs no solver

    result = solve_lp(StandardLP(c=costs, A=block, b=residual, name="completion"), time_limit=time_limit, options=options)
    if result.ok:
        return result.x, result.iterations
    m = block.shape[0]
    identity = sp.eye_array(m, format="csc")
    elastic = StandardLP(c=np.concatenate([np.zeros(block.shape[1]), np.ones(2 * m)]),
                         A=sp.hstack([block, identity, -identity]).tocsc(), b=residual, name="completion|least-violation")
    fallback = solve_lp(elastic, time_limit=time_limit, options=options)
    x = fallback.x[: block.shape[1]] if fallback.x is not None else np.zeros(block.shape[1])
    return x, result.iterations + fallback.iterations


def complete(lp: StandardLP, x: np.ndarray, decision: DecisionMap, time_limit: float = 60.0,
             options: Optional[dict] = None) -> Completion:
    """Keep x[decision.columns] and complete the other columns exactly (module docstring).

    ``x``: a point of shape (n,) (a projected optimum); ``time_limit`` (seconds) and ``options``
    (HiGHS options) apply to the restricted LP of the ``lp`` rule.

    Median regression of y = (1, 3, 2) on one constant: the decision beta = 2 completes to the
    residual parts u = (0, 1, 0), v = (1, 0, 0):

    >>> from calib.families.lp_quantile import quantile_regression_lp
    >>> form = quantile_regression_lp(np.ones((3, 1)), np.array([1.0, 3.0, 2.0]), 0.5)
    >>> done = complete(form.lp, np.array([2.0, 9.0, 9.0, 9.0, 9.0, 9.0, 9.0, 0.0]), form.lp.decision)
    >>> done.method, done.x.tolist()
    ('rows', [2.0, 0.0, 1.0, 0.0, 1.0, 0.0, 0.0, 0.0])
    """
    decided = decision.columns
    rest = np.setdiff1d(np.arange(lp.n_cols), decided)
    point = np.zeros(lp.n_cols)
    point[decided] = x[decided]
    if rest.size == 0:
        return Completion(point, "none")
    residual = lp.b - np.asarray(lp.A[:, decided] @ x[decided]).ravel() if decided.size else lp.b.copy()
    block = _completion_block(lp, rest)
    if np.all(np.diff(block.indptr) <= 1):  # a column in no row at all stays at 0
        point[rest] = complete_by_rows(block, lp.c[rest], residual)
        return Completion(point, "rows")
    point[rest], iterations = _restricted_lp(block, lp.c[rest], residual, time_limit, options)
    return Completion(point, "lp", iterations)
