"""What every reduction handler shares: the trial skeleton and the retrieval-selection rule.

A handler (one per problem kind) implements a few hooks (listed in :class:`Handler`): the
projected dimension, the original solve, the reduction by a drawn projector, the reduced solve and
the errors of an original-space point, plus its table of retrievals. :meth:`Handler.trial_records` runs one trial:
one projected solve, then every selected retrieval on it, one :mod:`calib.metrics` record each.

Retrieval selection (:meth:`Handler.retrieval_names`): of the retrieval names a spec or a probe
asks for, a handler runs those its kind supports, in the order asked; when it supports none of
them it runs its :attr:`Handler.default_retrieval`. The records of :meth:`Handler.trial_records`
come in the order of ``retrieval_names(requested)``, so a caller labels rows with that list.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field
from typing import Any, Callable, ClassVar, Optional

import numpy as np

from calib.metrics import ratio, record, rel_diff
from calib.projectors.base import Projector
from calib.solvers.result import SolveResult


@dataclass
class Retrieved:
    """An original-space point and the retrieval-specific metric fields it produced; ``untimed``: seconds
    of the call spent on work shared with other trials (a factorisation built during it), left out of
    ``t_retrieve``."""

    x: np.ndarray
    extra: dict = field(default_factory=dict)
    untimed: float = 0.0


@dataclass
class Context:
    """Everything a retrieval may use: the original problem and solve, the reduced problem and solve."""

    problem: Any
    original: SolveResult
    reduced: Any
    projected: SolveResult
    solver: dict

    @property
    def time_limit(self) -> float:
        return float(self.solver.get("time_limit_s", 60.0))


class Handler:
    """Base class of the per-kind reductions.

    Subclasses define, as static methods: ``projected_dim(problem) -> int`` (the dimension m that
    T of shape (k, m) shrinks), ``solve_original(problem, solver) -> SolveResult``,
    ``reduce(problem, projector) -> reduced``, ``solve_reduced(reduced, solver) -> SolveResult`` and
    ``point_metrics(problem, x) -> dict`` (feas_error and, where the class has a cone, sign_violation).
    ``solver`` is the spec's solver table (``time_limit_s`` in seconds, optional ``highs``/``scs``
    option tables).
    """

    kind: ClassVar[str] = ""
    #: retrieval name -> function(Context) -> Retrieved
    retrievals: ClassVar[dict[str, Callable[[Context], Retrieved]]] = {}
    default_retrieval: ClassVar[str] = ""
    #: "relaxation" (projected optimum <= original) or "restriction" (>=): the sign of proj_gap
    bound: ClassVar[str] = "relaxation"

    @classmethod
    def retrieval_names(cls, requested: Optional[list[str]]) -> list[str]:
        """The supported names of ``requested`` in order, else ``[default_retrieval]``."""
        chosen = [name for name in dict.fromkeys(requested or []) if name in cls.retrievals]
        return chosen or [cls.default_retrieval]

    @classmethod
    def trial_records(cls, problem, original: SolveResult, projector: Projector, retrievals: list[str],
                      solver: dict) -> list[dict]:
        """One metrics record per selected retrieval, all sharing one projected solve."""
        start = time.perf_counter()
        reduced = cls.reduce(problem, projector)
        t_sketch = projector.draw_seconds + (time.perf_counter() - start)
        projected = cls.solve_reduced(reduced, solver)
        common = solve_fields(original, projected, cls.bound)
        common["t_sketch"] = t_sketch
        context = Context(problem, original, reduced, projected, solver)
        rows = []
        for name in cls.retrieval_names(retrievals):
            values = dict(common)
            if projected.ok:
                values.update(cls._retrieve(context, name))
                spent = t_sketch + projected.seconds + values["t_retrieve"] + (values.get("t_factor") or 0.0)
                values["time_saved"] = original.seconds - spent
            rows.append(record(**values))
        return rows

    @classmethod
    def _retrieve(cls, context: Context, name: str) -> dict:
        start = time.perf_counter()
        got = cls.retrievals[name](context)
        values = {"t_retrieve": time.perf_counter() - start - got.untimed, **cls.point_metrics(context.problem, got.x), **got.extra}
        if context.original.ok:
            value = context.problem.objective(got.x)
            values["obj_error"] = rel_diff(value, context.original.objective)
            if context.original.objective != 0.0:
                values["obj_ratio"] = value / context.original.objective
        return values


class RowProjectionHandler(Handler):
    """A kind whose equality constraints A x = b are aggregated to (TA) x = Tb, x in a cone (LP, SDP).

    The projected problem keeps the cost and the cone, so it is a relaxation solved by the same
    solver as the original. Subclasses add ``kind``, ``retrievals``, ``default_retrieval``,
    ``solve_original`` and ``cone_violation(x) -> float`` (the sign_violation of a point).
    """

    bound = "relaxation"

    @staticmethod
    def projected_dim(problem) -> int:
        return problem.n_rows

    @staticmethod
    def reduce(problem, projector: Projector):
        """The same problem with A -> T A and b -> T b (T of shape (k, m))."""
        return dataclasses.replace(problem, A=projector.apply(problem.A), b=projector.apply(problem.b),
                                   name=f"{problem.name}|{projector.name}-k{projector.k}")

    @classmethod
    def solve_reduced(cls, reduced, solver: dict) -> SolveResult:
        return cls.solve_original(reduced, solver)

    @classmethod
    def point_metrics(cls, problem, x: np.ndarray) -> dict:
        return {"feas_error": relative_residual(problem, x), "sign_violation": cls.cone_violation(x)}


def relative_residual(problem, x: np.ndarray) -> float:
    """||residual(x)|| / max(1, ||b||) for a problem with ``residual`` and ``b`` (LP, SDP).

    >>> from calib.problems import StandardLP
    >>> relative_residual(StandardLP(c=[1.0], A=[[1.0]], b=[2.0]), np.array([1.0]))
    0.5
    """
    return ratio(np.linalg.norm(problem.residual(x)), np.linalg.norm(problem.b))


def solve_fields(original: SolveResult, projected: SolveResult, bound: str) -> dict:
    """The metric fields that describe the two solves (statuses, values, verdicts, the bound's gap)."""
    values = dict(
        orig_status=original.status, orig_feasible=original.feasible, t_solve_orig=original.seconds,
        proj_status=projected.status, proj_message=projected.solver_message, proj_feasible=projected.feasible,
        proj_iterations=projected.iterations, t_solve_proj=projected.seconds,
    )
    if original.ok:
        values["orig_objective"] = original.objective
    if projected.ok:
        values["proj_objective"] = projected.objective
    if original.ok and projected.ok:
        sign = 1.0 if bound == "relaxation" else -1.0
        values["proj_gap"] = ratio(sign * (original.objective - projected.objective), abs(original.objective))
    if original.feasible is not None and projected.feasible is not None:
        values["feasibility_agrees"] = original.feasible == projected.feasible
    return values
