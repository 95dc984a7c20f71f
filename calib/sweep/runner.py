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

A trial is done when every retrieval it needs has a stored row; a trial stored before retrievals
were added to the campaign runs again for the missing ones only (same stream, same projection).

A spec with ``k = {search = ...}`` runs :class:`SearchCoordinator` instead: one
:class:`~calib.sweep.search.KSearch` per (size, projector, retrieval) asks for trials, which are
the grid's trials (same identity and stream), so every stored one is read instead of run. A search
is a pure function of the outcomes in trial order, so after a kill the same command replays it
from the store and runs only what was missing.
"""

from __future__ import annotations

import time
from collections import Counter, deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

from calib.keys import canonical_json
from calib.store.database import Store
from calib.sweep.expansion import count_trials, instance_refs, instance_trials
from calib.sweep.spec import Spec
from calib.sweep.tasks import Failure, ORIGINAL_FIELDS, OriginalTask, TrialTask, failed_original
from calib.trial import InstanceRef, Trial

#: what a coordinator keeps per stored trial: the retrievals it has rows for
Stored = dict


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
    searches: list = field(default_factory=list)  # SearchCell, for a k search

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
            kind = SearchCoordinator if spec.k_grid.is_search else Coordinator
            return kind(spec, store, executor, progress).run()
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
        self.stored = self.store.stored_retrievals()
        _, planned = count_trials(self.spec)
        self.progress = Progress(total=sum(len(self._todo(ref, ks, labels)) for ref, ks, labels in instance_refs(self.spec)))
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
            todo = self._todo(ref, ks, labels)
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

    def _todo(self, ref: InstanceRef, ks: list[int], labels: list[str]) -> list[tuple[Trial, tuple]]:
        """(trial, retrievals still missing) for the trials of ``ref`` not fully stored."""
        wanted = retrieval_names(family_kind(ref), self.spec.retrievals)
        return [(trial, missing) for trial in instance_trials(self.spec, ref, ks, labels)
                if (missing := self._missing(trial, wanted))]

    def _missing(self, trial: Trial, wanted) -> tuple:
        stored = self.stored.get(trial.trial_id, ())
        return tuple(name for name in wanted if name not in stored)

    def _submit(self, task) -> None:
        if isinstance(task, TrialTask):
            self._submitted[task.trial.trial_id] = task
        self.executor.submit(task.token, task, self.timeout)
        self._in_flight += 1

    def _queue_trials(self, todo: list[tuple[Trial, tuple]], stored_row: dict) -> None:
        self._ready.extend(self._trial_task(trial, retrievals, stored_row) for trial, retrievals in todo)

    def _trial_task(self, trial: Trial, retrievals: tuple, stored_row: dict) -> TrialTask:
        original = {name: stored_row.get(name) for name in ORIGINAL_FIELDS}
        return TrialTask(trial, tuple(retrievals), self.spec.solver, original, self.spec.plugins)

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
            solve = failed_original("stopped_on_time" if result.status == "timeout" else "solver_failed",
                                    f"{result.status}: {result.message}", result.seconds)
        else:
            solve = result["row"]
        self.store.add_instance({**identity_row(ref), **solve})
        self.originals += 1
        self._queue_trials(todo, self.store.instance_row(instance_id))

    def _store_trial(self, trial_id: str, result) -> None:
        task = self._submitted.pop(trial_id)
        if not self._missing(task.trial, task.retrievals):
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
        self.stored.setdefault(trial_id, set()).update(task.retrievals)
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


def family_kind(ref: InstanceRef) -> str:
    """The problem kind of an instance, known from its family without building it."""
    from calib.families import get

    return get(ref.family).kind


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


@dataclass
class SearchCell:
    """One searched cell: the instances of one size, one projector, one retrieval, and its search."""

    family: str
    params: dict
    refs: list
    projector: object  # ProjectorChoice
    retrieval: str
    k_label: str
    search: object  # calib.sweep.search.KSearch
    interrupted: str = ""

    @property
    def label(self) -> str:
        from calib.families import get
        from calib.families.base import size_label

        return f"{self.family} {size_label(get(self.family).size_keys, self.params)} / {self.projector.label} / {self.retrieval}"

    def trials_at(self, k: int, count: int) -> list[Trial]:
        """The first ``count`` trials at k in search order: replicate 0 of every instance, then 1, ..."""
        width = len(self.refs)
        return [Trial(self.refs[j % width], self.projector, k, j // width, self.k_label) for j in range(count)]


def search_cells(spec: Spec, extend: bool = True) -> list[SearchCell]:
    """One :class:`SearchCell` per (size, projector, retrieval) of a search spec, in spec order.

    ``extend`` False keeps every search at its high end (a store created before the extension,
    :meth:`calib.store.database.Store.searches_extend`); True lets the spec's ``extend`` decide.
    """
    from calib.families import get
    from calib.sweep.kgrid import k_values, search_range
    from calib.sweep.search import KSearch

    cells = []
    for cell in spec.families:
        family = get(cell.name)
        for params in cell.sizes:
            m = family.projected_dim(params)
            low, high = search_range(spec.k_grid, m)
            top = m - 1 if extend and spec.k_grid.extend else None  # above high: up to the largest reduction
            label = k_values(spec.k_grid, family, params)[1][0]
            refs = [InstanceRef(cell.name, params, index, spec.root_seed) for index in range(cell.instances)]
            for choice in spec.projectors:
                for retrieval in retrieval_names(family.kind, spec.retrievals):
                    search = KSearch(low, high, spec.target.rate, spec.target.confidence, len(refs) * spec.replicates,
                                     spec.k_grid.step, top=top)
                    cells.append(SearchCell(cell.name, params, refs, choice, retrieval, label, search))
    return cells


def trial_successes(rows: list[dict], kinds: dict[str, str], predicate) -> dict[str, dict[str, bool]]:
    """trial id -> retrieval -> success of stored trial rows under ``predicate``, in one
    :func:`calib.verdicts.success.judge_records` call; ``kinds`` maps each row's instance id to its kind."""
    import json

    from calib.verdicts.success import judge_records

    records = [{**(json.loads(row["metrics"]) if isinstance(row["metrics"], str) else {}),
                "status": row["status"], "kind": kinds[row["instance_id"]]} for row in rows]
    successes: dict[str, dict[str, bool]] = {}
    for row, success in zip(rows, judge_records(records, predicate)):
        successes.setdefault(row["trial_id"], {})[row["retrieval"]] = success
    return successes


class StoredOutcomes:
    """The success of stored trials under the spec's ``[target]`` predicate, each read from the store once.

    ``stored`` (trial id -> the retrievals it has rows for, :meth:`Store.stored_retrievals`) is shared
    with a running coordinator, which adds to it as trials are stored.
    """

    def __init__(self, spec: Spec, store: Store, stored: Optional[dict] = None):
        self.spec, self.store = spec, store
        self.stored = store.stored_retrievals() if stored is None else stored
        self._outcomes: dict[str, dict] = {}   # trial id -> retrieval -> success
        self._rows: dict[str, dict] = {}       # instance id -> stored instance row

    def holds(self, trial: Trial, retrieval: str) -> bool:
        """Whether the store has the row of ``trial`` for ``retrieval``."""
        return retrieval in self.stored.get(trial.trial_id, ())

    def instance(self, instance_id: str) -> Optional[dict]:
        """The stored instance row, or None when its original is not stored yet."""
        if instance_id not in self._rows:
            row = self.store.instance_row(instance_id)
            if row is None:
                return None
            self._rows[instance_id] = row
        return self._rows[instance_id]

    def successes(self, trials: list[Trial], retrieval: str) -> list[bool]:
        """Success of each stored trial for ``retrieval``; the ones not yet known are read in one batch."""
        unknown = [trial for trial in trials if retrieval not in self._outcomes.get(trial.trial_id, {})]
        if unknown:
            rows = self.store.trial_rows_of([trial.trial_id for trial in unknown])
            kinds = {trial.instance.instance_id: self.instance(trial.instance.instance_id)["kind"] for trial in unknown}
            for trial_id, known in trial_successes(rows, kinds, self.spec.target.predicate).items():
                self._outcomes.setdefault(trial_id, {}).update(known)
        return [self._outcomes[trial.trial_id][retrieval] for trial in trials]

    def source(self, cell: SearchCell):
        """The :data:`calib.sweep.search.OutcomeSource` of ``cell`` from the store alone: None as soon
        as one of the trials asked for is not stored."""
        def read(k: int, count: int) -> Optional[list[bool]]:
            trials = cell.trials_at(k, count)
            if not all(self.holds(trial, cell.retrieval) for trial in trials):
                return None
            return self.successes(trials, cell.retrieval)

        return read


class SearchCoordinator(Coordinator):
    """Drives the k searches of a spec on the executor; trials and originals stored as by the grid.

    Each search is fed through :func:`calib.sweep.search.drive`: its source reads the stored trials and
    submits the missing ones, answering None until they are stored.
    """

    def run(self) -> RunSummary:
        from calib.sweep.search import drive

        start = time.perf_counter()
        self.stored = self.store.stored_retrievals()
        self.known = StoredOutcomes(self.spec, self.store, self.stored)
        self.cells = search_cells(self.spec, extend=self.store.searches_extend())  # as the store was run
        self.progress = Progress(total=0)
        self.requested: set[str] = set()   # trial ids some search asked for
        self.reused = 0
        self._pending_originals: set[str] = set()
        self._lost_ids: set[str] = set()
        sources = [(cell, self._source(cell)) for cell in self.cells]
        self._notify()
        while True:
            for cell, source in sources:  # feed every search what the store holds; submit what they still need
                if not cell.interrupted:
                    drive(cell.search, source)
            if not self._in_flight:
                break
            finished = self.executor.next_done()
            self._in_flight -= 1
            self._handle(finished.token, finished.result)
        return RunSummary(self.store.path, self.executor.name, len(self.requested), self.reused,
                          self.progress.done, dict(self.progress.statuses), self.lost, self.originals,
                          time.perf_counter() - start, searches=self.cells)

    def _source(self, cell: SearchCell):
        """The outcome source of ``cell`` on the live run: None (waiting) after submitting missing trials."""
        def read(k: int, count: int) -> Optional[list]:
            if cell.interrupted:
                return None
            return self._read(cell, k, count)

        return read

    def _read(self, cell: SearchCell, k: int, count: int) -> Optional[list]:
        """The outcomes of the first ``count`` trials at k, or None after submitting the missing ones."""
        trials = cell.trials_at(k, count)
        missing = []
        for trial in trials:
            stored = self.known.holds(trial, cell.retrieval)
            if trial.trial_id not in self.requested:
                self.requested.add(trial.trial_id)
                self.reused += stored
            if not stored:
                missing.append(trial)
        if not missing:
            return self.known.successes(trials, cell.retrieval)
        for trial in missing:
            if trial.trial_id in self._lost_ids:
                cell.interrupted = "the executor lost trials of this search: run the same command again to resume"
                return None
            self._request(trial, cell.retrieval)
        return None

    def _request(self, trial: Trial, retrieval: str) -> None:
        """Submit ``trial`` (once) for ``retrieval``, after its instance's original solve."""
        if trial.trial_id in self._submitted:
            return
        ref = trial.instance
        row = self.known.instance(ref.instance_id)
        if row is None:
            if ref.instance_id not in self._pending_originals:
                self._pending_originals.add(ref.instance_id)
                self._waiting[ref.instance_id] = (ref, [])  # no trials queued: the search asks again once it is stored
                self._submit(OriginalTask(ref, self.spec.solver, self.spec.plugins))
            return
        missing = self._missing(trial, retrieval_names(row["kind"], self.spec.retrievals))  # every search of the size
        self.progress.total += 1
        self._notify()
        self._submit(self._trial_task(trial, missing, row))

    def _store_original(self, instance_id: str, result) -> None:
        self._pending_originals.discard(instance_id)
        if isinstance(result, Failure) and result.status == "lost":
            self._waiting.pop(instance_id)
            self.lost += 1
            for cell in self.cells:
                if any(ref.instance_id == instance_id for ref in cell.refs):
                    cell.interrupted = "the executor lost an original solve: run the same command again to resume"
            return
        super()._store_original(instance_id, result)

    def _store_trial(self, trial_id: str, result) -> None:
        if isinstance(result, Failure) and result.status == "lost":
            self._lost_ids.add(trial_id)
        super()._store_trial(trial_id, result)


def replay_searches(spec: Spec, store: Store) -> list[SearchCell]:
    """The k searches of ``spec`` decided from ``store`` alone (read only, nothing runs).

    Each search is driven (:func:`calib.sweep.search.drive`) by :meth:`StoredOutcomes.source`, the
    same reading of stored trials a live run feeds it, so this gives the verdicts `calib run` printed;
    a search that needs a trial the store lacks is marked not finished.
    """
    from calib.sweep.search import drive

    known = StoredOutcomes(spec, store)
    cells = search_cells(spec, extend=store.searches_extend())  # replayed as the store was run
    for cell in cells:
        if not drive(cell.search, known.source(cell)):
            cell.interrupted = "search not finished: run the campaign again to complete it"
    return cells
