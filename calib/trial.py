"""One trial: its identity, its random stream, and running it (build, project, solve, retrieve, measure).

The layer between the problem handlers (:mod:`calib.reduce`, :mod:`calib.families`) and the store:
it knows nothing of specs, stores or executors. A trial is (instance, projector, k, replicate):
an :class:`InstanceRef` (family, full parameters, index, root seed), a :class:`ProjectorChoice`
(name and options), an integer k >= 1 and a replicate index. Its id hashes those canonical parameters with the
root seed and :data:`calib.SCHEMA_VERSION`. Its random stream is
``default_rng([instance_key, projector_key, k, replicate, root_seed])``; instances draw from
``default_rng([instance_key, root_seed])``. Neither depends on the order of expansion, so a grown
grid or a resumed run reproduces every existing number. One trial runs one projected solve and
then every retrieval method of the spec on it, giving one stored row per retrieval
(:func:`run_trial`: one projector draw of k x m, then the handler's projected solve and retrievals;
the cost is the handler's, see :mod:`calib.reduce`). Expanding a spec into its trials is the
engine's (:mod:`calib.sweep.expansion`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from calib import SCHEMA_VERSION
from calib.keys import stable_id, stable_key, stream


@dataclass(frozen=True)
class ProjectorChoice:
    """A projector of a campaign: its registered name and its options as sorted (key, value) pairs;
    ``label`` names it in the store and the tables, ``key`` seeds its part of a trial's stream."""

    name: str
    options: tuple = ()  # sorted (key, value) pairs

    @property
    def label(self) -> str:
        if not self.options:
            return self.name
        return f"{self.name}(" + ",".join(f"{key}={value}" for key, value in self.options) + ")"

    @property
    def key(self) -> int:
        return stable_key({"name": self.name, "options": dict(self.options)})


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
    """One trial: an instance, a projector, a target dimension k >= 1 and a replicate index; ``k_label``
    says where k came from in the grid (``fraction=0.1``, ``eps=0.3 (rule)``, "" for a value given)."""

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


