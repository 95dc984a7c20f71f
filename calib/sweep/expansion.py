"""A validated spec expanded into its instances and trials, in a deterministic order.

For each family cell of the spec (:class:`calib.sweep.spec.FamilyCell`), each of its sizes and each
instance index: one :class:`calib.trial.InstanceRef` with the k values of the grid at that size
(:func:`calib.sweep.kgrid.k_values`), then projectors x k x replicates trials. The order is fixed by
the spec alone, and a trial's identity and stream do not depend on it (:mod:`calib.trial`), so a
grown grid or a resumed run reproduces every stored number. Costs: O(trials) to expand,
O(instances) to count.
"""

from __future__ import annotations

from typing import Iterator

from calib.sweep.kgrid import k_values
from calib.sweep.spec import Spec
from calib.trial import InstanceRef, Trial


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
