"""Run a campaign: expand the spec, skip what the store already has, run the rest, store each trial.

The coordinating process alone writes the store. The original problem of each instance is
solved once and cached in the store; every trial of that instance reuses it. A trial that raises
becomes rows with status ``error`` and the exception text; the campaign goes on.
"""

from __future__ import annotations

import json
import time
import traceback
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Optional

from calib.keys import canonical_json
from calib.solvers.result import SolveResult
from calib.sweep.spec import Spec
from calib.sweep.store import Store, environment
from calib.sweep.trial import InstanceRef, Trial, expand, run_trial


@dataclass
class RunSummary:
    store_path: Path
    planned: int
    skipped: int
    ran: int
    failed: int
    seconds: float


def original_from_row(row: dict) -> SolveResult:
    """The cached original solve of an instance, as a :class:`SolveResult`."""
    objective = row["orig_objective"]
    return SolveResult(status=row["orig_status"], solver="cached", solver_code=row["orig_code"],
                       solver_message=row["orig_message"] or "",
                       objective=float("nan") if objective is None else objective,
                       x=row["orig_x"], iterations=row["orig_iterations"] or 0, seconds=row["orig_seconds"] or 0.0,
                       options=json.loads(row["solver_options"] or "{}"))


def prepare_instance(ref: InstanceRef, store: Store, solver: dict):
    """Build the instance and return (instance, original solve), solving and caching it if new."""
    from calib.families import get
    from calib.reduce import HANDLERS

    start = time.perf_counter()
    instance = ref.build()
    build_seconds = time.perf_counter() - start
    cached = store.instance_row(ref.instance_id)
    if cached is not None:
        return instance, original_from_row(cached)
    family = get(ref.family)
    original = HANDLERS[instance.kind].solve_original(instance.problem, solver)
    store.add_instance({
        "instance_id": ref.instance_id, "family": ref.family, "params": canonical_json(ref.params), "idx": ref.index,
        "kind": instance.kind, "projected_dim": family.projected_dim(ref.params), "n_points": family.n_points(ref.params),
        "orig_status": original.status, "orig_code": original.solver_code, "orig_message": original.solver_message,
        "orig_objective": original.objective if original.ok else None, "orig_seconds": original.seconds,
        "orig_iterations": original.iterations, "solver_options": canonical_json(original.options),
        "orig_x": original.x, "build_seconds": build_seconds,
    })
    return instance, original


def trial_rows(trial: Trial, instance, original: SolveResult, spec: Spec, env_id: str) -> list[dict]:
    """Run one trial and shape its store rows (one per retrieval); exceptions become error rows."""
    start = time.perf_counter()
    try:
        records = run_trial(trial, instance.problem, instance.kind, original, spec.retrievals, spec.solver)
        outcomes = [("ok", "", json.dumps(rec, sort_keys=True, allow_nan=False)) for rec in records]
    except Exception as error:  # one trial's failure must not stop the campaign
        last = traceback.extract_tb(error.__traceback__)[-1]
        message = f"{type(error).__name__}: {error} (at {Path(last.filename).name}:{last.lineno})"
        outcomes = [("error", message, None)] * len(spec.retrievals)
    seconds = time.perf_counter() - start
    stream_key = canonical_json([trial.instance.key, trial.projector.key, trial.k, trial.replicate, trial.instance.root_seed])
    return [{
        "trial_id": trial.trial_id, "retrieval": retrieval, "instance_id": trial.instance.instance_id,
        "projector": trial.projector.label, "projector_options": canonical_json(dict(trial.projector.options)),
        "k": trial.k, "k_label": trial.k_label, "replicate": trial.replicate, "status": status, "message": message,
        "metrics": metrics, "seconds": seconds, "stream_key": stream_key, "env_id": env_id,
    } for retrieval, (status, message, metrics) in zip(spec.retrievals, outcomes)]


def run_campaign(spec: Spec, out_dir: str | Path, progress: Optional[Callable[[int, int], None]] = None) -> RunSummary:
    """Run every trial of ``spec`` missing from its store under ``out_dir`` (serially)."""
    start = time.perf_counter()
    store = Store.create_or_resume(spec, out_dir)
    try:
        env_id = store.register_environment(environment())
        done = store.done_trial_ids()
        plan = expand(spec)
        planned = sum(len(trials) for _, trials in plan)
        ran = failed = 0
        for ref, trials in plan:
            todo = [trial for trial in trials if trial.trial_id not in done]
            if not todo:
                continue
            instance, original = prepare_instance(ref, store, spec.solver)
            for trial in todo:
                rows = trial_rows(trial, instance, original, spec, env_id)
                store.add_trial_rows(rows)
                ran += 1
                failed += rows[0]["status"] != "ok"
                if progress:
                    progress(ran, planned - len(done))
        return RunSummary(store.path, planned, len(done), ran, failed, time.perf_counter() - start)
    finally:
        store.close()
