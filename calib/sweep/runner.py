"""The coordinator: expand the spec, skip what the store holds, hand the rest to an executor, store
each finished task. It is the only process that writes the store.

Order of work: instances are taken in spec order. An instance whose original solve is not stored
yet first gets an :class:`~calib.sweep.tasks.OriginalTask`; when it comes back the original is
stored (once per instance, whatever the number of projectors, k, replicates or re-runs) and the
instance's trials are queued with the stored original attached. The next instance's original is
requested while the current one's trials still run, so workers do not wait for it.

Every finished trial is one transaction (its rows, one per retrieval); a trial that raised, timed
out or crashed its worker is stored too, with its status and message, and the campaign goes on.
Ctrl-C (KeyboardInterrupt) stops the workers; every trial stored so far stays, and running the
same command again resumes.
"""

from __future__ import annotations

import time
from collections import Counter, deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

from calib.keys import canonical_json
from calib.sweep.spec import Spec
from calib.sweep.store import Store
from calib.sweep.tasks import ORIGINAL_FIELDS, Failure, OriginalTask, TrialTask, failed_original
from calib.sweep.trial import InstanceRef, Trial, count_trials, instance_refs, instance_trials


@dataclass
class Progress:
    """Counts shown while a campaign runs: ``done`` of ``total`` trials to run, by status."""

    total: int
    done: int = 0
    statuses: Counter = field(default_factory=Counter)

    @property
    def failed(self) -> int:
        return self.done - self.statuses["ok"]


@dataclass
class RunSummary:
    store_path: Path
    executor: str
    planned: int
    skipped: int
    ran: int
    statuses: dict
    lost: int
    originals_solved: int
    seconds: float

    @property
    def failed(self) -> int:
        return self.ran - self.statuses.get("ok", 0)


def make_executor(workers: Optional[int] = None, scheduler: Optional[str] = None, inline: bool = False):
    """The executor for the options of ``calib run``: in-process, a Dask scheduler, or a local pool."""
    from calib.sweep.executors import DaskExecutor, InlineExecutor, LocalPool, default_workers

    if inline:
        return InlineExecutor()
    if scheduler:
        return DaskExecutor(scheduler)
    return LocalPool(workers or default_workers())


def run_campaign(spec: Spec, out_dir: str | Path, workers: Optional[int] = None, scheduler: Optional[str] = None,
                 inline: bool = False, new_campaign: bool = False,
                 progress: Optional[Callable[[Progress], None]] = None) -> RunSummary:
    """Run every trial of ``spec`` missing from its store under ``out_dir``.

    ``workers`` sizes the local pool (default: the cores), ``scheduler`` selects a Dask scheduler
    address instead, ``inline`` runs in this process. ``progress`` is called with a
    :class:`Progress` once before the first task and after every stored trial.
    """
    executor = make_executor(workers, scheduler, inline)  # first: a scheduler that is not there creates no store
    try:
        store = Store.create_or_resume(spec, out_dir, new_campaign)
        try:
            return Coordinator(spec, store, executor, progress).run()
        finally:
            store.close()
    finally:
        executor.close()


class Coordinator:
    """Feeds an executor from the spec and writes its results; one Coordinator serves one run."""

    def __init__(self, spec: Spec, store: Store, executor, progress: Optional[Callable[[Progress], None]] = None):
        self.spec, self.store, self.executor, self.report = spec, store, executor, progress
        self.solver_json = canonical_json(spec.solver)
        self.timeout = spec.solver.get("trial_timeout_s")
        self._env_ids: dict[str, str] = {}
        self._instances = instance_refs(spec)
        self._ready: deque = deque()        # TrialTasks whose original is known
        self._waiting: dict[str, tuple[InstanceRef, list[Trial]]] = {}  # original requested
        self._submitted: dict[str, TrialTask] = {}  # trial id -> task, while it runs
        self._in_flight = 0
        self.lost = 0
        self.originals = 0

    def run(self) -> RunSummary:
        start = time.perf_counter()
        self.done = self.store.done_trial_ids()
        _, planned = count_trials(self.spec)
        self.progress = Progress(total=planned - len(self.done))
        self._notify()
        self._fill()
        while self._in_flight:
            finished = self.executor.next_done()
            self._in_flight -= 1
            self._fill()  # keep the workers busy before writing
            self._handle(finished.token, finished.result)
            self._fill()
        return RunSummary(self.store.path, self.executor.name, planned, planned - self.progress.total,
                          self.progress.done, dict(self.progress.statuses), self.lost, self.originals,
                          time.perf_counter() - start)

    # ----- scheduling ----------------------------------------------------------------------
    def _fill(self) -> None:
        slots = self.executor.slots
        while self._in_flight < slots:
            if len(self._ready) < slots and len(self._waiting) < slots and self._open_next_instance():
                continue
            if not self._ready:
                return
            self._submit(self._ready.popleft())

    def _open_next_instance(self) -> bool:
        """Queue the next instance with trials to run; False when there is none left."""
        for ref, ks, labels in self._instances:
            todo = [trial for trial in instance_trials(self.spec, ref, ks, labels) if trial.trial_id not in self.done]
            if not todo:
                continue
            stored = self.store.instance_row(ref.instance_id)
            if stored is not None:
                self._queue_trials(todo, stored)
            else:
                self._waiting[ref.instance_id] = (ref, todo)
                self._submit(OriginalTask(ref, self.spec.solver, self.spec.plugins))
            return True
        return False

    def _submit(self, task) -> None:
        if isinstance(task, TrialTask):
            self._submitted[task.trial.trial_id] = task
        self.executor.submit(task.token, task, self.timeout)
        self._in_flight += 1

    def _queue_trials(self, trials: list[Trial], stored_row: dict) -> None:
        original = {name: stored_row.get(name) for name in ORIGINAL_FIELDS}
        retrievals = tuple(retrieval_names(stored_row["kind"], self.spec.retrievals))
        self._ready.extend(TrialTask(trial, retrievals, self.spec.solver, original, self.spec.plugins) for trial in trials)

    # ----- results -------------------------------------------------------------------------
    def _handle(self, token: str, result) -> None:
        kind, _, key = token.partition("-")
        if kind == "original":
            self._store_original(key, result)
        else:
            self._store_trial(key, result)

    def _store_original(self, instance_id: str, result) -> None:
        ref, todo = self._waiting.pop(instance_id)
        if isinstance(result, Failure) and result.status == "lost":
            self.lost += len(todo)
            return
        if isinstance(result, Failure):
            solve = failed_original("time_limit" if result.status == "timeout" else "error",
                                    f"{result.status}: {result.message}", result.seconds)
        else:
            solve = result["row"]
        self.store.add_instance({**identity_row(ref), **solve})
        self.originals += 1
        self._queue_trials(todo, self.store.instance_row(instance_id))

    def _store_trial(self, trial_id: str, result) -> None:
        task = self._submitted.pop(trial_id)
        if trial_id in self.done:
            return  # a duplicate delivery: rows are append-only and already stored
        if isinstance(result, Failure):
            if result.status == "lost":
                self.lost += 1
                return
            outcomes = [(result.status, result.message, None)] * len(task.retrievals)
            seconds, env_id = result.seconds, self._env_id(None)
        else:
            outcomes, seconds, env_id = result["outcomes"], result["seconds"], self._env_id(result["env"])
        rows = trial_rows(task.trial, task.retrievals, outcomes, seconds, env_id, self.solver_json)
        self.store.add_trial_rows(rows)
        self.done.add(trial_id)
        self.progress.done += 1
        self.progress.statuses[rows[0]["status"]] += 1
        self._notify()

    def _env_id(self, versions: Optional[dict]) -> str:
        """The environment id of a worker's versions (the coordinator's own when unknown)."""
        if versions is None:
            from calib.sweep.tasks import worker_environment

            versions = worker_environment()
        text = canonical_json(versions)
        if text not in self._env_ids:
            self._env_ids[text] = self.store.register_environment(versions)
        return self._env_ids[text]

    def _notify(self) -> None:
        if self.report is not None:
            self.report(self.progress)


def retrieval_names(kind: str, requested) -> list[str]:
    """The retrievals a trial of this kind runs (see :func:`calib.reduce.retrieval_names`)."""
    from calib.reduce import retrieval_names as select

    return select(kind, list(requested))


def identity_row(ref: InstanceRef) -> dict:
    """Instance-row fields known without building the instance."""
    from calib.families import get

    family = get(ref.family)
    return {"instance_id": ref.instance_id, "family": ref.family, "params": canonical_json(ref.params),
            "idx": ref.index, "kind": family.kind, "projected_dim": family.projected_dim(ref.params),
            "n_points": family.n_points(ref.params)}


def trial_rows(trial: Trial, retrievals, outcomes, seconds: float, env_id: str, solver_json: str) -> list[dict]:
    """The store rows of one trial: one per retrieval, with its identity and provenance."""
    return [{
        "trial_id": trial.trial_id, "retrieval": retrieval, "instance_id": trial.instance.instance_id,
        "projector": trial.projector.label, "projector_options": canonical_json(dict(trial.projector.options)),
        "k": trial.k, "k_label": trial.k_label, "replicate": trial.replicate, "status": status, "message": message,
        "metrics": metrics, "seconds": seconds, "stream_key": canonical_json(trial.stream_keys), "env_id": env_id,
        "root_seed": trial.instance.root_seed, "solver_options": solver_json,
    } for retrieval, (status, message, metrics) in zip(retrievals, outcomes)]
