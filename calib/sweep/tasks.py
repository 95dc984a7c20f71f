"""The work a worker does: solve the original problem of an instance, or run one trial.

Every executor (in-process, local process pool, Dask) ships the same picklable task objects to
:func:`execute` and gets back plain dictionaries; only the coordinating process turns them into
store rows. A task is a pure function of its fields: the instance is rebuilt from its identity and
its own random stream, the trial draws from its own stream, so running a task twice (a retry, a
re-run, another machine) gives the same numbers.

Workers keep the last few built instances (:data:`INSTANCE_CACHE_SIZE`) so the trials of one
instance do not rebuild it. The original solve is taken from the store (so a fresh campaign and a
resumed one use byte-identical originals) and referred to by its instance's identity: a worker
process receives it once, with the first trial of that instance it runs, and keeps the last
:data:`ORIGINAL_CACHE_SIZE` of them; later tasks travel with ``original = None``
(:meth:`TrialTask.without_original`). The sending side mirrors that cache exactly
(:class:`HeldOriginals`), because a worker runs its tasks one at a time and in the order sent. At
10^5 observations the original's ``x`` alone (2 · 10^5 columns) is 1.6 MB, pickled again for every trial otherwise.
"""

from __future__ import annotations

import functools
import json
import math
import time
from collections import OrderedDict
from dataclasses import dataclass
from typing import Optional, Union

from calib.errors import describe_exception
from calib.trial import InstanceRef, Trial

#: built instances kept per worker process (most recently used)
INSTANCE_CACHE_SIZE = 4

#: original solves kept per worker process (most recently used), beside the instance cache
ORIGINAL_CACHE_SIZE = INSTANCE_CACHE_SIZE

#: statuses of a trial row: ran to the end, raised, exceeded trial_timeout_s, or killed its worker
TRIAL_STATUSES = ("ok", "error", "timeout", "crashed")

#: the instance-row fields that describe the original solve: the reference method's result, then the
#: fair baseline (the fastest configured method reaching its verdict) and every method's record
ORIGINAL_FIELDS = ("orig_status", "orig_code", "orig_message", "orig_objective", "orig_seconds",
                   "orig_iterations", "solver_options", "orig_x", "baseline_method", "baseline_seconds", "methods")

_instances: "OrderedDict[str, object]" = OrderedDict()
_originals: "OrderedDict[str, dict]" = OrderedDict()


@dataclass(frozen=True)
class OriginalTask:
    """Build an instance and solve its original problem (once per instance and campaign)."""

    instance: InstanceRef
    solver: dict
    plugins: tuple = ()

    @property
    def token(self) -> str:
        return f"original-{self.instance.instance_id}"


@dataclass(frozen=True)
class TrialTask:
    """Run one trial against the stored original solve of its instance.

    ``original`` holds the :data:`ORIGINAL_FIELDS` of the instance row (``orig_x`` as an array), or
    None when the worker process running the task already holds it (sent with an earlier task).
    """

    trial: Trial
    retrievals: tuple
    solver: dict
    original: Optional[dict]
    plugins: tuple = ()

    @property
    def token(self) -> str:
        return f"trial-{self.trial.trial_id}"

    @property
    def instance_id(self) -> str:
        return self.trial.instance.instance_id

    def without_original(self) -> "TrialTask":
        """This task referring to its instance's original by identity only."""
        return TrialTask(self.trial, self.retrievals, self.solver, None, self.plugins)


Task = Union[OriginalTask, TrialTask]


class HeldOriginals:
    """The sender's mirror of one worker process's cache of originals (same size, same LRU rule).

    :meth:`prepare` returns the task to send: the full task the first time an instance's original
    goes to this worker (or after the worker dropped it), else the task without its original. Valid
    while the worker runs the tasks it is sent in order, one at a time; a new worker process needs a
    new mirror.
    """

    def __init__(self, size: int = ORIGINAL_CACHE_SIZE) -> None:
        self.size = size
        self._held: "OrderedDict[str, None]" = OrderedDict()

    def prepare(self, task):
        if not isinstance(task, TrialTask):
            return task
        key = task.instance_id
        held = key in self._held and task.original is not None
        self._held.pop(key, None)
        self._held[key] = None
        while len(self._held) > self.size:
            self._held.popitem(last=False)
        return task.without_original() if held else task


@dataclass(frozen=True)
class Failure:
    """A task that produced no result: "timeout", "crashed", "error" (raised outside the trial
    code) or "lost" (the executor gave up on it: nothing is stored and a re-run retries it)."""

    status: str
    message: str
    seconds: float = 0.0


def execute(task: Task) -> dict:
    """Run ``task`` in this process and return its result payload (a plain dict).

    Exceptions inside the trial become an "error" outcome; the payload also carries the worker's
    package versions (``env``) so every row records the environment that produced it.
    """
    from calib.sweep.plugins import load

    if isinstance(task, TrialTask):  # first: the sender's mirror counts on this happening
        remember_original(task)
    load(task.plugins)
    if isinstance(task, OriginalTask):
        return {"row": solve_original(task), "env": worker_environment()}
    start = time.perf_counter()
    outcomes = trial_outcomes(task)
    return {"outcomes": outcomes, "seconds": time.perf_counter() - start, "env": worker_environment()}


@functools.cache
def worker_environment() -> dict:
    from calib.store.environment import environment

    return environment()


def built_instance(ref: InstanceRef):
    """The instance of ``ref``, from this worker's small cache or freshly built."""
    instance = _instances.pop(ref.instance_id, None)
    if instance is None:
        instance = ref.build()
    _instances[ref.instance_id] = instance
    while len(_instances) > INSTANCE_CACHE_SIZE:
        _instances.popitem(last=False)
    return instance


def remember_original(task: TrialTask) -> dict:
    """The original of ``task``'s instance: the one it carries (now kept), or the one kept from an
    earlier task of that instance (same LRU rule and size as :class:`HeldOriginals`)."""
    key = task.instance_id
    original = task.original if task.original is not None else _originals.pop(key, None)
    if original is None:
        raise LookupError(f"no original solve held for instance {key}: the task was sent without it")
    _originals.pop(key, None)
    _originals[key] = original
    while len(_originals) > ORIGINAL_CACHE_SIZE:
        _originals.popitem(last=False)
    return original


def solve_original(task: OriginalTask) -> dict:
    """Instance-row fields of the original solve (``orig_*``, ``solver_options``, ``build_seconds``)
    and of its fair baseline (every configured method, :func:`calib.solvers.methods.race`), and the
    instance's ``features`` (JSON, :func:`calib.features.stored_features`)."""
    from calib.keys import canonical_json
    from calib.reduce import HANDLERS

    from calib.features import stored_features

    start = time.perf_counter()
    features = None
    try:
        instance = built_instance(task.instance)
        build_seconds = time.perf_counter() - start
        features = stored_features(instance.kind, instance.problem)
        baseline = HANDLERS[instance.kind].solve_baseline(instance.problem, task.solver)
        original = baseline.result
    except Exception as error:  # a failed build or solve is recorded, the campaign goes on
        return failed_original("solver_failed", describe_exception(error), time.perf_counter() - start) | {"features": features}
    # SQLite stores a NaN REAL as NULL: a point set's original has no objective, so it is None on both sides
    objective = original.objective if original.ok and math.isfinite(original.objective) else None
    return {"orig_status": original.status, "orig_code": original.solver_code, "orig_message": original.solver_message,
            "orig_objective": objective, "orig_seconds": original.seconds,
            "orig_iterations": original.iterations, "solver_options": canonical_json(original.options),
            "orig_x": original.x, "build_seconds": build_seconds, "baseline_method": baseline.fastest,
            "baseline_seconds": baseline.seconds, "methods": json.dumps(baseline.summary(), sort_keys=True, default=str),
            "features": features}


def failed_original(status: str, message: str, seconds: float) -> dict:
    """Instance-row fields for an original solve that produced nothing (status from the solver
    vocabulary: "solver_failed" for an exception or a crash, "stopped_on_time" for an external timeout)."""
    return {"orig_status": status, "orig_code": None, "orig_message": message, "orig_objective": None,
            "orig_seconds": seconds, "orig_iterations": 0, "solver_options": "{}", "orig_x": None,
            "build_seconds": None, "baseline_method": None, "baseline_seconds": None, "methods": None}


def stored_baseline(fields: dict) -> dict:
    """The fair baseline of a stored instance row (:func:`calib.solvers.methods.baseline_info` fields);
    a row written before baselines were recorded gives its original solve time."""
    methods = json.loads(fields.get("methods") or "{}")
    simplex = methods.get("simplex") or {}
    seconds = fields.get("baseline_seconds")
    return {"method": fields.get("baseline_method"), "seconds": fields["orig_seconds"] if seconds is None else seconds,
            "simplex_iterations": simplex.get("iterations"), "simplex_seconds": simplex.get("seconds")}


def original_result(fields: dict):
    """The original solve as a :class:`~calib.solvers.result.SolveResult`, from stored fields."""
    from calib.solvers.result import SolveResult

    objective = fields["orig_objective"]
    return SolveResult(status=fields["orig_status"], solver="cached", solver_code=fields["orig_code"],
                       solver_message=fields["orig_message"] or "",
                       objective=float("nan") if objective is None else objective,
                       x=fields["orig_x"], iterations=fields["orig_iterations"] or 0,
                       seconds=fields["orig_seconds"] or 0.0, options=json.loads(fields["solver_options"] or "{}"))


def trial_outcomes(task: TrialTask) -> list[tuple[str, Optional[str], Optional[str]]]:
    """(status, message, metrics JSON) per retrieval; an exception gives "error" for each."""
    from calib.trial import run_trial

    try:
        original = remember_original(task)
        instance = built_instance(task.trial.instance)
        records = run_trial(task.trial, instance.problem, instance.kind, original_result(original),
                            list(task.retrievals), task.solver, stored_baseline(original))
        return [("ok", "", json.dumps(record, sort_keys=True, allow_nan=False)) for record in records]
    except Exception as error:  # one trial's failure must not stop the campaign
        return [("error", describe_exception(error), None)] * len(task.retrievals)
