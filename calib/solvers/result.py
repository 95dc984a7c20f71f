"""The solver-independent result record and the status vocabulary.

Every adapter maps its solver's own status through one table into :data:`STATUSES`, and keeps the
solver's code and message beside it. An infeasible or unbounded problem is a result, not an
exception.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

import numpy as np

#: calib's status vocabulary, shared by all solvers: the trade's own three words, then calib's own.
STATUSES = (
    "optimal",                # solved to the solver's tolerances
    "infeasible",             # primal infeasible (certified by the solver)
    "unbounded",              # primal unbounded
    "no_finite_optimum",      # infeasible or unbounded, the solver did not say which
    "unverified",             # the solver stopped with a point it does not vouch for
    "stopped_on_time",        # a time limit stopped the solve (the solver's or calib's own)
    "stopped_on_iterations",  # an iteration limit stopped the solve
    "solver_failed",          # the solver failed (model error, numerical failure, crash)
)

#: words of store formats 1-3 -> calib's words (store format 4 rewrites them; reading an older store maps them)
FORMER_STATUSES = {"infeasible_or_unbounded": "no_finite_optimum", "inaccurate": "unverified",
                   "time_limit": "stopped_on_time", "iteration_limit": "stopped_on_iterations", "error": "solver_failed"}


@dataclass
class SolveResult:
    """Outcome of one solve.

    Attributes
    ----------
    status : str
        One of :data:`STATUSES`.
    solver : str
        Solver name, e.g. ``"highs"``.
    solver_code : int
        The solver's own status code.
    solver_message : str
        The solver's own status text.
    objective : float
        Objective value including any constant offset (NaN unless a point was returned).
    x : ndarray or None
        Primal point, shape (n,).
    basis : ndarray or None
        Indices of the basic structural columns (LP simplex only).
    iterations : int
    seconds : float
        Wall time of the solve call alone.
    options : dict
        The solver options used (recorded with every result).
    method : str or None
        The method name of :mod:`calib.solvers.methods` that produced it, when chosen by name.
    """

    status: str
    solver: str
    solver_code: int
    solver_message: str
    objective: float = float("nan")
    x: Optional[np.ndarray] = None
    basis: Optional[np.ndarray] = None
    iterations: int = 0
    seconds: float = 0.0
    options: dict = field(default_factory=dict)
    dual: Optional[np.ndarray] = None
    method: Optional[str] = None

    @property
    def ok(self) -> bool:
        """Whether the solve reached an optimum (status ``optimal``)."""
        return self.status == "optimal"

    @property
    def feasible(self) -> Optional[bool]:
        """True when a feasible point was certified, False when infeasibility was, else None."""
        if self.status in ("optimal", "unbounded"):
            return True
        if self.status == "infeasible":
            return False
        return None
