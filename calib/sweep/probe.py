"""One instance measured as a campaign would: the instance a probe names and its two experiments.

The target (:func:`resolve_target`) is one of: a registered family with ``key=value`` parameters
(instance 0 of that family); an MPS file (read as an LP in standard form: the family ``mps-dir``
with ``dir`` = the folder as written and ``name`` = the file name); or a saved instance (the
``STEM.json`` manifest of :func:`calib.instance_io.save_instance`, any kind). Its random streams
are those of a campaign with ``root_seed = seed`` on the same instance (family, parameters, index),
so a probe reproduces that campaign's rows.

Two experiments, each exactly what campaign trials do (:func:`calib.trial.run_trial`):

- :func:`measure_at_k`: replicates 0 .. r-1 at one k, each a projector draw, a projected solve and
  every retrieval; one metrics record per (replicate, retrieval): r x len(retrievals) records.
- :func:`search_k`: the campaign's k search (:class:`calib.sweep.search.KSearch`, driven by
  :func:`calib.sweep.search.drive`) on this one instance, for one retrieval: at each k trials
  (replicates 0, 1, ...) are run until the anytime bound decides k, at most ``cap`` per k. Each
  trial costs one projected solve and its retrieval; a trial that raises counts as a failure.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Optional, Sequence

from calib.errors import InputError

MPS_SUFFIXES = (".mps", ".mps.gz")


@dataclass
class Target:
    """One probed instance: its problem, kind, label and the identity its random streams derive from."""

    label: str
    kind: str
    problem: Any
    ref: Any  # calib.trial.InstanceRef
    n_points: int


def parse_assignments(items: list[str], where: str) -> dict:
    """``["a=1", "b=x"]`` -> ``{"a": 1, "b": "x"}``; values read as TOML literals, else as text.

    >>> parse_assignments(["rows=20", "density=0.5", "cost=nonnegative", "flag=true"], "--param")
    {'rows': 20, 'density': 0.5, 'cost': 'nonnegative', 'flag': True}
    """
    values = {}
    for item in items:
        key, sep, text = item.partition("=")
        if not sep or not key.strip():
            raise InputError(where, f"cannot read {item!r}", "write KEY=VALUE, e.g. rows=200")
        try:
            values[key.strip()] = tomllib.loads(f"v = {text.strip()}")["v"]
        except tomllib.TOMLDecodeError:
            values[key.strip()] = text.strip()
    return values

def resolve_target(target: str, params: Sequence[str] = (), seed: int = 0) -> Target:
    """The instance named by ``target`` (a family, an MPS file or a saved STEM.json), built
    deterministically with the streams of ``root_seed = seed``; ``params`` are the family's
    ``key=value`` parameters (refused for a file)."""
    from calib import families
    from calib.trial import InstanceRef

    path = Path(target)
    if target.lower().endswith(".json"):
        return _saved_target(path, params, seed)
    if path.is_file() or target.lower().endswith(MPS_SUFFIXES):
        if not path.is_file():
            raise InputError(str(path), "no such MPS file", "check the path (an MPS file, a saved instance STEM.json or a family name)")
        if params:
            raise InputError("--param", "parameters apply to families, not to an MPS file", "drop --param")
        family, given, where = families.get("mps-dir"), {"dir": str(path.parent), "name": path.name}, str(path)
    elif target in families.REGISTRY:
        family, given, where = families.get(target), parse_assignments(list(params), "--param"), "--param"
    else:
        raise InputError("INSTANCE_OR_FAMILY", f"{target!r} is neither an existing file nor a family",
                         f"give an MPS file, a saved instance (.json) or one of {', '.join(sorted(families.REGISTRY))}")
    resolved = family.resolve(given, where)
    ref = InstanceRef(family.name, resolved, 0, seed)
    instance = ref.build()
    label = family.name + " " + " ".join(f"{key}={value}" for key, value in sorted(resolved.items()) if value is not None)
    return Target(label, instance.kind, instance.problem, ref, family.n_points(resolved))


def _saved_target(path: Path, params: Sequence[str], seed: int) -> Target:
    """A saved instance (:func:`calib.instance_io.load_instance`); streams of its family, params and index."""
    from calib import families
    from calib.instance_io import load_instance
    from calib.trial import InstanceRef

    if params:
        raise InputError("--param", "parameters apply to families, not to a saved instance", "drop --param")
    instance, _ = load_instance(path)
    family = families.get(instance.family, f"{path}: family")
    resolved = family.resolve(instance.params, f"{path}: params")
    ref = InstanceRef(instance.family, resolved, instance.index, seed)
    n_points = family.n_points(resolved)
    return Target(f"{path} ({instance.family} #{instance.index})", instance.kind, instance.problem, ref, n_points)


def check_retrievals(requested: Optional[Sequence[str]], kind: str) -> list[str]:
    """The retrievals to run: ``requested`` (each checked against the kind's, repeats dropped), else
    every retrieval of the kind."""
    from calib.reduce import HANDLERS

    known = list(HANDLERS[kind].retrievals)
    for name in requested or []:
        if name not in known:
            raise InputError("--retrieval", f"{name!r} is not a retrieval of {kind} problems", f"choose from {', '.join(known)}")
    return list(dict.fromkeys(requested)) if requested else known


def projector_choice(name: str, options: Sequence[str] = ()):
    """The :class:`calib.sweep.spec.ProjectorChoice` of projector ``name`` with ``key=value`` ``options``."""
    from calib import projectors
    from calib.trial import ProjectorChoice

    projectors.check_name(name, "--projector")
    parsed = parse_assignments(list(options), "--projector-opt")
    return ProjectorChoice(name, tuple(sorted(parsed.items())))


def check_projector(choice, k: int, m: int) -> None:
    """Draw the projector once so that options it does not take fail here, naming the option."""
    from calib import projectors

    try:
        projectors.make(choice.name, k, m, 0, **dict(choice.options))
    except TypeError as error:
        raise InputError("--projector-opt", str(error), f"check the options of projector {choice.name!r}") from None


def measure_at_k(target: Target, choice, k: int, replicates: int, baseline, retrievals: list[str],
                 solver: dict) -> list[dict]:
    """The records of replicates 0 .. ``replicates`` - 1 at ``k``: per replicate and retrieval one
    :mod:`calib.metrics` record with ``replicate`` and ``retrieval`` in front (``replicates`` x
    ``len(retrievals)`` records); ``baseline`` is the original's solve by every method
    (:meth:`Handler.solve_baseline`)."""
    from calib.solvers.methods import baseline_info
    from calib.trial import Trial, run_trial

    records = []
    for replicate in range(replicates):
        rows = run_trial(Trial(target.ref, choice, k, replicate), target.problem, target.kind, baseline.result, retrievals,
                         solver, baseline_info(baseline))
        records += [{"replicate": replicate, "retrieval": name, **row} for name, row in zip(retrievals, rows)]
    return records


def search_k(target: Target, choice, retrieval: str, original, *, low: int, high: int, cap: int, predicate,
             rate: float, confidence: float, solver: dict):
    """The k search of a campaign on this one instance and ``retrieval``, between ``low`` and ``high``,
    at most ``cap`` trials per k, against success ``rate`` at ``confidence``; returns the finished
    :class:`calib.sweep.search.KSearch`. Trials are replicates 0, 1, ... at each k, run once each."""
    from calib.sweep.search import KSearch, drive

    search = KSearch(low, high, rate, confidence, cap)
    outcomes: dict[int, list] = {}

    def run_trials(k: int, count: int) -> list:
        done = outcomes.setdefault(k, [])
        for replicate in range(len(done), count):
            done.append(trial_success(target, choice, k, replicate, original, retrieval, solver, predicate))
        return done[:count]

    drive(search, run_trials)
    return search


def trial_success(target: Target, choice, k: int, replicate: int, original, retrieval: str, solver: dict, predicate) -> bool:
    """Success of one campaign trial under ``predicate``; a trial that raises counts as a failure, as in a campaign."""
    from calib.verdicts.success import judge_records
    from calib.trial import Trial, run_trial

    try:
        (record,) = run_trial(Trial(target.ref, choice, k, replicate), target.problem, target.kind, original, [retrieval], solver)
    except Exception:  # noqa: BLE001 - stored as an "error" row by a campaign, a failure either way
        return False
    return judge_records([record], predicate, target.kind)[0]
