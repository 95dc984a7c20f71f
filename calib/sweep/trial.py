"""Trials: identity, expansion of a spec, and execution of one trial.

A trial is (instance, projector, k, replicate). Its id hashes those canonical parameters with the
root seed and :data:`calib.SCHEMA_VERSION`. Its random stream is
``default_rng([instance_key, projector_key, k, replicate, root_seed])``; instances draw from
``default_rng([instance_key, root_seed])``. Neither depends on the order of expansion, so a grown
grid or a resumed run reproduces every existing number. One trial runs one projected solve and
then every retrieval method of the spec on it, giving one stored row per retrieval.
"""

from __future__ import annotations


from dataclasses import dataclass
from functools import cached_property
from typing import Iterator

import numpy as np

from calib import SCHEMA_VERSION
from calib.keys import stable_id, stable_key, stream
from calib.sweep.spec import ProjectorChoice, Spec, k_values


@dataclass(frozen=True)
class InstanceRef:
    """How to (re)build one instance: family, full parameters, index."""

    family: str
    params: dict
    index: int
    root_seed: int

    @property
    def identity(self) -> dict:
        """What names the instance: family, full parameters and index (the root seed left out)."""
        return {"family": self.family, "params": self.params, "index": self.index}

    @cached_property
    def key(self) -> int:
        """The stable integer key of :attr:`identity`: the first entropy word of its stream."""
        return stable_key(self.identity)

    @cached_property
    def instance_id(self) -> str:
        """The stored id: the identity with the root seed and the schema version, hashed."""
        return stable_id({**self.identity, "root_seed": self.root_seed, "schema": SCHEMA_VERSION})

    def build(self):
        """Generate the instance from its own stream (deterministic)."""
        from calib.families import get

        family = get(self.family)
        return family.make(self.params, self.index, stream(self.key, root_seed=self.root_seed))


@dataclass(frozen=True)
class Trial:
    """One projected solve: an instance, a projector, k and a replicate number (its k label: the rule
    that gave k, e.g. ``fraction=0.3``, or empty)."""

    instance: InstanceRef
    projector: ProjectorChoice
    k: int
    replicate: int
    k_label: str = ""

    @cached_property
    def trial_id(self) -> str:
        """The stored id: a hash of the instance id, projector, options, k and replicate."""
        return stable_id({"instance": self.instance.instance_id, "projector": self.projector.label,
                          "projector_options": dict(self.projector.options), "k": self.k,
                          "replicate": self.replicate})

    @property
    def stream_keys(self) -> list[int]:
        """Entropy of the trial's stream: [instance_key, projector_key, k, replicate, root_seed]."""
        return [self.instance.key, self.projector.key, self.k, self.replicate, self.instance.root_seed]

    def rng(self) -> np.random.Generator:
        """The trial's own random stream, from :attr:`stream_keys` (the projection is drawn from it)."""
        return stream(*self.stream_keys[:-1], root_seed=self.instance.root_seed)


def instance_refs(spec: Spec) -> Iterator[tuple[InstanceRef, list[int], list[str]]]:
    """Every instance of the spec with its k values and their labels, in a deterministic order."""
    from calib.families import get

    for cell in spec.families:
        family = get(cell.name)
        for params in cell.sizes:
            ks, labels = k_values(spec.k_grid, family, params)
            for index in range(cell.instances):
                yield InstanceRef(cell.name, params, index, spec.root_seed), ks, labels


def instance_trials(spec: Spec, ref: InstanceRef, ks: list[int], labels: list[str]) -> list[Trial]:
    """The trials of one instance: projectors x k x replicates, in a deterministic order."""
    return [Trial(ref, choice, k, replicate, label)
            for choice in spec.projectors for k, label in zip(ks, labels)
            for replicate in range(spec.replicates)]


def expand(spec: Spec) -> list[tuple[InstanceRef, list[Trial]]]:
    """All instances of the spec with their trials, in a deterministic order."""
    return [(ref, instance_trials(spec, ref, ks, labels)) for ref, ks, labels in instance_refs(spec)]


def count_trials(spec: Spec) -> tuple[int, int]:
    """(instances, trials) of the spec without building any trial."""
    instances = trials = 0
    for _, ks, _ in instance_refs(spec):
        instances += 1
        trials += len(spec.projectors) * len(ks) * spec.replicates
    return instances, trials


def run_trial(trial: Trial, problem, kind: str, original, retrievals: list[str], solver: dict,
              baseline: dict | None = None) -> list[dict]:
    """Execute one trial on an already built problem and its cached original solve.

    ``baseline`` is the original's fair baseline (:func:`calib.sweep.tasks.stored_baseline`).
    Returns one metrics record per retrieval (see :mod:`calib.metrics`).
    """
    from calib import projectors
    from calib.reduce import HANDLERS

    handler = HANDLERS[kind]
    projector = projectors.make(trial.projector.name, trial.k, handler.projected_dim(problem), trial.rng(),
                                **dict(trial.projector.options))
    return handler.trial_records(problem, original, projector, retrievals, solver, baseline)


