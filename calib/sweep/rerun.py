"""Re-run one stored trial alone and compare its fresh numbers with the stored ones.

The trial is rebuilt from what its rows record: the instance identity (family, parameters, index)
from the instances table, the root seed, projector, k and replicate from the trial row, the solver
options from the row (or, for rows of store format 1, from the stored spec). Its id is recomputed
and must match, so a change of the identity scheme is caught rather than compared. The original
problem is solved again too, and the trial runs against the stored original exactly as it did in
the campaign, in a fresh worker process with the same time limit.

Everything must be equal except timings (metrics measured in seconds, see
:data:`calib.metrics.FIELDS`): deterministic streams, one solver thread and fixed solver seeds
make a trial a pure function of its identity.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

from calib.checks import is_real
from calib.errors import InputError
from calib.metrics import FIELDS
from calib.store.database import Store
from calib.store.sqlite import DAMAGED_FIX
from calib.sweep.plugins import allowed
from calib.sweep.tasks import Failure, ORIGINAL_FIELDS, OriginalTask, TrialTask
from calib.trial import InstanceRef, ProjectorChoice, Trial

#: metric fields that measure time: shown side by side, never compared
TIMING_FIELDS = tuple(name for name, field in FIELDS.items() if field.units == "s")


@dataclass
class Comparison:
    """Stored and fresh values of one trial, line by line (label, stored, fresh, verdict)."""

    header: list[str]
    lines: list[tuple[str, str, str, str]] = field(default_factory=list)

    def add(self, label: str, stored, fresh, timing: bool = False) -> None:
        verdict = "timing" if timing else ("same" if _same(stored, fresh) else "DIFFERENT")
        self.lines.append((label, _show(stored), _show(fresh), verdict))

    @property
    def identical(self) -> bool:
        return all(verdict != "DIFFERENT" for *_, verdict in self.lines)

    def render(self) -> str:
        rows = [line for line in self.lines if not line[0].startswith("#")]
        width = max([len(line[0]) for line in rows] + [5])
        value = max([len(line[1]) for line in rows] + [len("stored")])
        out = list(self.header)
        out.append(f"  {'':{width}}  {'stored':{value}}  {'fresh':{value}}")
        for label, stored, fresh, verdict in self.lines:
            if label.startswith("#"):
                out.append(label[1:])
                continue
            out.append(f"  {label:{width}}  {stored:{value}}  {fresh:{value}}  {verdict}")
        differing = sum(verdict == "DIFFERENT" for *_, verdict in self.lines)
        out.append("result: identical except timings" if not differing else f"result: {differing} value(s) differ")
        return "\n".join(out)

    def section(self, title: str) -> None:
        self.lines.append((f"#{title}", "", "", ""))


def _same(stored, fresh) -> bool:
    if isinstance(stored, float) and isinstance(fresh, float) and math.isnan(stored) and math.isnan(fresh):
        return True
    return stored == fresh


def _show(value) -> str:
    if isinstance(value, float):
        return repr(value)
    return "null" if value is None else str(value)


def resolve_trial_id(store: Store, text: str) -> str:
    """The full trial id for ``text`` (a full id or an unambiguous prefix of at least 6 characters)."""
    if store.trial_records(text):
        return text
    matches = store.matching_trial_ids(text) if len(text) >= 6 else []
    if len(matches) == 1:
        return matches[0]
    if not matches:
        raise InputError("TRIAL_ID", f"no trial {text!r} in {store.path}",
                         "copy a trial_id from `calib export` (a prefix of 6 or more characters is enough)")
    raise InputError("TRIAL_ID", f"{text!r} matches several trials ({', '.join(matches)})", "give more characters")


def rebuild(store: Store, trial_id: str) -> tuple[Trial, tuple, dict, dict, tuple]:
    """(trial, retrievals, solver options, stored instance row, plugins) of a stored trial.

    Fields calib could not have written (not JSON, wrong types) are an :class:`InputError`
    naming the store and the trial.
    """
    try:
        return _rebuild(store, trial_id)
    except InputError:
        raise
    except (ValueError, TypeError, KeyError, AttributeError, IndexError) as error:
        raise InputError(str(store.path), f"trial {trial_id} cannot be rebuilt from its rows ({type(error).__name__}: {error})",
                         DAMAGED_FIX) from None


def _rebuild(store: Store, trial_id: str) -> tuple[Trial, tuple, dict, dict, tuple]:
    rows = store.trial_records(trial_id)
    first = rows[0]
    meta = store.meta()
    instance = store.instance_row(first["instance_id"])
    if instance is None:
        raise InputError(str(store.path), f"instance {first['instance_id']} of trial {trial_id} is not stored",
                         "the store is incomplete; re-run the campaign to fill it")
    root_seed = first.get("root_seed")
    if root_seed is None:  # store format 1: the root seed is the last entropy word of the stream
        root_seed = json.loads(first["stream_key"])[-1]
    ref = InstanceRef(instance["family"], json.loads(instance["params"]), instance["idx"], int(root_seed))
    options = json.loads(first["projector_options"])
    projector = ProjectorChoice(first["projector"].split("(")[0], tuple(sorted(options.items())))
    trial = Trial(ref, projector, first["k"], first["replicate"], first["k_label"] or "")
    if trial.trial_id != trial_id:
        raise InputError(trial_id, "the rebuilt trial has another id: the store was written by a calib with a "
                         "different trial identity scheme", "re-run it with the calib version recorded in the store")
    solver = first.get("solver_options")
    solver = json.loads(solver) if solver else _spec_solver(store)
    for key in ("time_limit_s", "trial_timeout_s"):
        value = solver[key]
        if not is_real(value) or not 0 < value < 1e6:
            raise ValueError(f"solver option {key} = {value!r}")
    plugins = allowed(tuple(name for name in meta.get("plugins", "").split(",") if name), str(store.path))
    return trial, tuple(row["retrieval"] for row in rows), solver, instance, plugins


def _spec_solver(store: Store) -> dict:
    from calib.sweep.spec import parse_spec

    return parse_spec(store.stored_spec(), source=f"{store.path} (stored spec)").solver


def rerun(store: Store, trial_text: str) -> Comparison:
    """Re-run one trial (and its original solve) in a fresh worker and compare with the store."""
    from calib.sweep.plugins import load
    from calib.sweep.sandbox import Sandbox

    trial_id = resolve_trial_id(store, trial_text)
    trial, retrievals, solver, instance, plugins = rebuild(store, trial_id)
    load(plugins)
    original = {name: instance.get(name) for name in ORIGINAL_FIELDS}
    box = Sandbox()
    try:
        fresh_original = box.run("original", OriginalTask(trial.instance, solver, plugins), solver["trial_timeout_s"])
        box = box.renewed()
        fresh_trial = box.run("trial", TrialTask(trial, retrievals, solver, original, plugins), solver["trial_timeout_s"])
    finally:
        box.close()
    comparison = Comparison(header=[
        f"trial {trial_id}: {trial.instance.family} {_size(trial.instance.family, trial.instance.params)} instance {trial.instance.index} | "
        f"{trial.projector.label} | k={trial.k} | replicate {trial.replicate} | root seed {trial.instance.root_seed}",
        f"stream entropy {trial.stream_keys}; solver options {json.dumps(solver, sort_keys=True)}"])
    _compare_original(comparison, instance, fresh_original)
    _compare_trial(comparison, store.trial_records(trial_id), fresh_trial)
    return comparison


def _size(family: str, params: dict) -> str:
    from calib.families import get

    return get(family).size_label(params)


def _compare_original(comparison: Comparison, stored: dict, fresh) -> None:
    comparison.section("original solve (cached in the store, solved again now):")
    if isinstance(fresh, Failure):
        fresh = {"orig_status": fresh.status, "orig_message": fresh.message}
    else:
        fresh = fresh["row"]
    for name in ("orig_status", "orig_code", "orig_message", "orig_objective", "orig_iterations"):
        comparison.add(name, stored.get(name), fresh.get(name))
    comparison.add("orig_x", _digest(stored.get("orig_x")), _digest(fresh.get("orig_x")))
    comparison.add("orig_seconds", stored.get("orig_seconds"), fresh.get("orig_seconds"), timing=True)
    # the fastest method is decided by wall time, so the baseline's method and time are timings too
    for name in ("baseline_method", "baseline_seconds"):
        comparison.add(name, stored.get(name), fresh.get(name), timing=True)


def _digest(x) -> str:
    """Shape and a hash of the exact bytes of a vector (None -> "null")."""
    if x is None:
        return "null"
    import hashlib

    import numpy as np

    data = np.ascontiguousarray(x, dtype=float)
    return f"{data.shape[0]} values, blake2b {hashlib.blake2b(data.tobytes(), digest_size=6).hexdigest()}"


def _compare_trial(comparison: Comparison, rows: list[dict], fresh) -> None:
    if isinstance(fresh, Failure):
        outcomes = [(fresh.status, fresh.message, None)] * len(rows)
        seconds = fresh.seconds
    else:
        outcomes, seconds = fresh["outcomes"], fresh["seconds"]
    for row, (status, message, metrics) in zip(rows, outcomes):
        comparison.section(f"retrieval {row['retrieval']}:")
        comparison.add("status", row["status"], status)
        # messages of exceptions are deterministic; those of timeouts and crashes carry timings and addresses
        comparison.add("message", row["message"] or "", message or "", timing=row["status"] in ("timeout", "crashed"))
        stored_metrics = json.loads(row["metrics"]) if row["metrics"] else {}
        fresh_metrics = json.loads(metrics) if metrics else {}
        for name in FIELDS:
            if name in stored_metrics or name in fresh_metrics:
                comparison.add(name, stored_metrics.get(name), fresh_metrics.get(name), timing=name in TIMING_FIELDS)
        comparison.add("seconds", row["seconds"], seconds, timing=True)
