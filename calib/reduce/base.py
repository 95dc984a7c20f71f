"""What every reduction handler shares: the trial skeleton and the retrieval-selection rule.

A handler (one per problem kind) implements a few hooks (listed in :class:`Handler`): the
projected dimension, its solve methods, the reduction by a drawn projector, the objective's size
and the errors of an original-space point, plus its table of retrievals.
:meth:`Handler.trial_records` runs one trial: one projected solve, then every selected retrieval
on it, one :mod:`calib.metrics` record each, each measured on its own point and timed end to end
(sketch + projected solve + this retrieval with its extra solves) against the fair baseline of
:mod:`calib.solvers.methods`.

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

from calib.metrics import record, relative, scale
from calib.projectors.base import Projector
from calib.solvers import methods as solve_methods
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
    #: the fair baseline of the original (:func:`calib.solvers.methods.baseline_info`), empty when unknown
    baseline: dict = field(default_factory=dict)

    @property
    def time_limit(self) -> float:
        """The spec's time limit of one solve, in seconds (60 when unset)."""
        return float(self.solver.get("time_limit_s", 60.0))


class Handler:
    """Base class of the per-kind reductions.

    Subclasses define, as static methods: ``projected_dim(problem) -> int`` (the dimension m that
    T of shape (k, m) shrinks), ``solve_with(problem, method, solver, need_basis) -> SolveResult or
    None`` (None: the method does not apply), ``reduce(problem, projector) -> reduced``,
    ``reduced_problem(reduced)`` (the solvable problem inside it), ``objective_size(problem, x)``
    (the objective's size at x without cancellation, see :mod:`calib.metrics`) and
    ``point_metrics(problem, x, x_ref) -> dict`` (feas_error and, where the class has a cone,
    sign_violation; ``x_ref`` is the reference point of the feasibility scale), and optionally
    ``decision_metrics(problem, x, x_orig) -> dict`` (how the user's decision at x compares with
    the original optimum's: ``decision_error``, ``cut_ratio``). ``solver`` is the
    spec's solver table (``time_limit_s`` in seconds, optional ``highs``/``scs`` option tables,
    ``methods`` and ``projected``, see :mod:`calib.solvers.methods`).
    """

    kind: ClassVar[str] = ""
    #: retrieval name -> function(Context) -> Retrieved
    retrievals: ClassVar[dict[str, Callable[[Context], Retrieved]]] = {}
    default_retrieval: ClassVar[str] = ""
    #: "relaxation" (projected optimum <= original) or "restriction" (>=): the sign of proj_gap
    bound: ClassVar[str] = "relaxation"
    #: retrievals that read the projected basis (the projected solve must return one)
    basis_retrievals: ClassVar[frozenset] = frozenset()

    @classmethod
    def solve_baseline(cls, problem: Any, solver: dict) -> solve_methods.Baseline:
        """The original solved by every configured method (:func:`calib.solvers.methods.race`)."""
        return solve_methods.race(lambda name: cls.solve_with(problem, name, solver, False),
                                  solve_methods.configured(cls.kind, solver))

    @classmethod
    def solve_original(cls, problem: Any, solver: dict) -> SolveResult:
        """The reference solve of the original (the first configured method that reaches a verdict)."""
        return cls.solve_baseline(problem, solver).result

    @classmethod
    def projected_method(cls, problem: Any, solver: dict) -> str:
        """The method of a projected solve: the spec's ``projected`` choice, ``auto`` by default."""
        chosen = (solver.get("projected") or {}).get(cls.kind, "auto")
        return cls.auto_method(problem) if chosen == "auto" else chosen

    @classmethod
    def auto_method(cls, problem: Any) -> str:
        """The ``auto`` method: the first default method that applies (LPs override this)."""
        return solve_methods.DEFAULT_METHODS[cls.kind][0]

    @classmethod
    def solve_reduced(cls, reduced: Any, solver: dict, need_basis: bool = True) -> SolveResult:
        """The projected problem (from :meth:`reduce`) solved by :meth:`projected_method`, or by the
        first default method when the named one does not apply; ``result.method`` says which."""
        problem = cls.reduced_problem(reduced)
        method = cls.projected_method(problem, solver)
        result = cls.solve_with(problem, method, solver, need_basis)
        if result is None:  # the named method does not apply to this problem: its first default does
            method = cls.auto_method(problem)
            result = cls.solve_with(problem, method, solver, need_basis)
        result.method = method
        return result

    @staticmethod
    def reduced_problem(reduced: Any) -> Any:
        """The solvable problem inside a reduced one: the reduced problem itself unless a kind keeps
        more beside it (QPs)."""
        return reduced

    @classmethod
    def retrieval_names(cls, requested: Optional[list[str]]) -> list[str]:
        """The supported names of ``requested`` in order, else ``[default_retrieval]``."""
        chosen = [name for name in dict.fromkeys(requested or []) if name in cls.retrievals]
        return chosen or [cls.default_retrieval]

    @classmethod
    def trial_records(cls, problem: Any, original: SolveResult, projector: Projector, retrievals: list[str],
                      solver: dict, baseline: Optional[dict] = None) -> list[dict]:
        """One metrics record per selected retrieval, all sharing one projected solve.

        ``baseline`` holds the fair baseline of the original (:func:`calib.solvers.methods.baseline_info`);
        without it the original's own solve time is the baseline.
        """
        baseline = {key: value for key, value in (baseline or {}).items() if value is not None}
        baseline.setdefault("seconds", original.seconds)
        if original.options.get("solver") == "simplex":  # the reference solve is itself the cold simplex solve
            baseline.setdefault("simplex_iterations", original.iterations)
            baseline.setdefault("simplex_seconds", original.seconds)
        names = cls.retrieval_names(retrievals)
        start = time.perf_counter()
        reduced = cls.reduce(problem, projector)
        t_sketch = projector.draw_seconds + (time.perf_counter() - start)
        projected = cls.solve_reduced(reduced, projected_solver(solver), need_basis=bool(cls.basis_retrievals & set(names)))
        obj_scale = cls.objective_scale(problem, original)
        common = solve_fields(original, projected, cls.bound, obj_scale)
        common.update(t_sketch=t_sketch, t_baseline=baseline["seconds"], proj_method=projected.method)
        context = Context(problem, original, reduced, projected, solver, baseline)
        rows = []
        for name in names:
            values = dict(common)
            if projected.ok:
                values.update(cls._retrieve(context, name, obj_scale))
            values["t_total"] = t_sketch + projected.seconds + values.get("t_retrieve", 0.0) + (values.get("t_factor") or 0.0)
            values["time_saved"] = baseline["seconds"] - values["t_total"]
            rows.append(record(**values))
        return rows

    @classmethod
    def objective_scale(cls, problem: Any, original: SolveResult) -> Optional[float]:
        """The objective's scale (:mod:`calib.metrics`); None without an original optimum."""
        if not original.ok or original.x is None:
            return None
        return scale(original.objective, cls.objective_size(problem, original.x))

    @staticmethod
    def decision_metrics(problem: Any, x: np.ndarray, x_orig: np.ndarray) -> dict:
        """Metrics of the user's decision at x against the original optimum x_orig (none by default)."""
        return {}

    @classmethod
    def _retrieve(cls, context: Context, name: str, obj_scale: Optional[float]) -> dict:
        start = time.perf_counter()
        got = cls.retrievals[name](context)
        reference = context.original.x if context.original.ok and context.original.x is not None else got.x
        values = {"t_retrieve": time.perf_counter() - start - got.untimed,
                  **cls.point_metrics(context.problem, got.x, reference), **got.extra}
        if context.original.ok:
            if context.original.x is not None:
                values.update(cls.decision_metrics(context.problem, got.x, context.original.x))
            value = context.problem.objective(got.x)
            if obj_scale is not None:
                values["obj_error"] = relative(value - context.original.objective,
                                               obj_scale or cls.objective_size(context.problem, got.x))
            if context.original.objective != 0.0:
                values["obj_ratio"] = value / context.original.objective
        return values


def projected_solver(solver: dict) -> dict:
    """The solver table of a projected solve: the spec's ``projected_time_limit_s`` (seconds) in
    place of ``time_limit_s`` and ``projected_max_iters`` as the iteration cap of every solver
    (HiGHS simplex, interior point and QP; SCS ``max_iters``), when they are set. A projected
    problem can be much harder for its solver than the original (an aggregated SDP has no slack
    left); it stops at its own caps with status ``stopped_on_time`` or ``stopped_on_iterations``,
    which the analysis counts as a failure. Retrievals keep the original's limits.

    >>> projected_solver({"time_limit_s": 60.0, "projected_time_limit_s": 5.0, "projected_max_iters": 2000})["scs"]
    {'max_iters': 2000}
    """
    out = dict(solver)
    if solver.get("projected_time_limit_s") is not None:
        out["time_limit_s"] = solver["projected_time_limit_s"]
    cap = solver.get("projected_max_iters")
    if cap is not None:
        out["highs"] = {**(solver.get("highs") or {}), "simplex_iteration_limit": cap, "ipm_iteration_limit": cap,
                        "qp_iteration_limit": cap}
        out["scs"] = {**(solver.get("scs") or {}), "max_iters": cap}
    return out


class RowProjectionHandler(Handler):
    """A kind whose equality constraints A x = b are aggregated to (TA) x = Tb, x in a cone (LP, SDP).

    The projected problem keeps the cost and the cone, so it is a relaxation solved by the methods
    of the same kind. Subclasses add ``kind``, ``retrievals``, ``default_retrieval``, ``solve_with``,
    ``objective_size`` and ``cone_violation(x) -> float`` (the sign_violation of a point).
    """

    bound = "relaxation"

    @staticmethod
    def projected_dim(problem: Any) -> int:
        """m, the equality rows of A (the length of b) that T of shape (k, m) aggregates."""
        return problem.n_rows

    @staticmethod
    def reduce(problem: Any, projector: Projector) -> Any:
        """The same problem with A -> T A and b -> T b (T of shape (k, m))."""
        return dataclasses.replace(problem, A=projector.apply(problem.A), b=projector.apply(problem.b),
                                   name=f"{problem.name}|{projector.name}-k{projector.k}")

    @classmethod
    def point_metrics(cls, problem: Any, x: np.ndarray, x_ref: np.ndarray) -> dict:
        """``feas_error`` (:func:`relative_residual`, at the scale of ``x_ref``) and ``sign_violation``
        (the cone's) of the point x, shape (n,) like ``x_ref``."""
        return {"feas_error": relative_residual(problem, x, x_ref), "sign_violation": cls.cone_violation(x)}



def linear_size(c: np.ndarray, x: np.ndarray, offset: float) -> float:
    """|c|^T |x| + |offset|: a linear objective's size at x without cancellation.

    >>> linear_size(np.array([1.0, -2.0]), np.array([3.0, 1.0]), -1.0)
    6.0
    """
    return float(np.abs(c) @ np.abs(x)) + abs(float(offset))


def relative_distance(point: np.ndarray, reference: np.ndarray) -> Optional[float]:
    """||point - reference|| / ||reference|| (2-norms; see :func:`calib.metrics.relative` at a zero reference).

    >>> relative_distance(np.array([3.0, 5.0]), np.array([3.0, 4.0])) == 1 / 5
    True
    """
    return relative(np.linalg.norm(point - reference), np.linalg.norm(reference))


def relative_residual(problem: Any, x: np.ndarray, x_ref: np.ndarray) -> Optional[float]:
    """||A x - b|| / max(||b||, SCALE_FLOOR * || |A| |x_ref| ||) for an LP or SDP (svec) problem.

    >>> from calib.problems import StandardLP
    >>> relative_residual(StandardLP(c=[1.0], A=[[1.0]], b=[2.0]), np.array([1.0]), np.array([2.0]))
    0.5
    """
    terms = np.linalg.norm(abs(problem.A) @ np.abs(x_ref))
    return relative(np.linalg.norm(problem.residual(x)), scale(np.linalg.norm(problem.b), terms))


def solve_fields(original: SolveResult, projected: SolveResult, bound: str, obj_scale: Optional[float]) -> dict:
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
    if original.ok and obj_scale is not None:
        values["obj_scale"] = obj_scale
    if original.ok and projected.ok and obj_scale is not None:
        sign = 1.0 if bound == "relaxation" else -1.0
        gap = sign * (original.objective - projected.objective)
        values["proj_gap"] = None if relative(gap, obj_scale) is None else float(np.sign(gap)) * relative(gap, obj_scale)
    if original.feasible is not None and projected.feasible is not None:
        values["feasibility_agrees"] = original.feasible == projected.feasible
    return values
