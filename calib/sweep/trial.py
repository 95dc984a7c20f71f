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
        return {"family": self.family, "params": self.params, "index": self.index}

    @property
    def key(self) -> int:
        return stable_key(self.identity)

    @property
    def instance_id(self) -> str:
        return stable_id({**self.identity, "root_seed": self.root_seed, "schema": SCHEMA_VERSION})

    def build(self):
        """Generate the instance from its own stream (deterministic)."""
        from calib.families import get

        family = get(self.family)
        return family.make(self.params, self.index, stream(self.key, root_seed=self.root_seed))


@dataclass(frozen=True)
class Trial:
    instance: InstanceRef
    projector: ProjectorChoice
    k: int
    replicate: int
    k_label: str = ""

    @property
    def trial_id(self) -> str:
        return stable_id({"instance": self.instance.instance_id, "projector": self.projector.label,
                          "projector_options": dict(self.projector.options), "k": self.k,
                          "replicate": self.replicate})

    def rng(self):
        return stream(self.instance.key, self.projector.key, self.k, self.replicate, root_seed=self.instance.root_seed)


def expand(spec: Spec) -> list[tuple[InstanceRef, list[Trial]]]:
    """All instances of the spec with their trials, in a deterministic order."""
    from calib.families import get

    out = []
    for cell in spec.families:
        family = get(cell.name)
        for params in cell.sizes:
            ks, labels = k_values(spec.k_grid, family, params)
            for index in range(cell.instances):
                ref = InstanceRef(cell.name, params, index, spec.root_seed)
                trials = [Trial(ref, choice, k, replicate, label)
                          for choice in spec.projectors for k, label in zip(ks, labels)
                          for replicate in range(spec.replicates)]
                out.append((ref, trials))
    return out


def run_trial(trial: Trial, problem, kind: str, original, retrievals: list[str], solver: dict) -> list[dict]:
    """Execute one trial on an already built problem and its cached original solve.

    Returns one metrics record per retrieval (see :mod:`calib.metrics`).
    """
    from calib import projectors
    from calib.reduce import HANDLERS

    handler = HANDLERS[kind]
    projector = projectors.make(trial.projector.name, trial.k, handler.projected_dim(problem), trial.rng(),
                                **dict(trial.projector.options))
    return handler.trial_records(problem, original, projector, retrievals, solver)


