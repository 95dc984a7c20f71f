"""``calib run SPEC --dry-run``: what a campaign will do and roughly how long it will take.

The plan (instances and trials per family and size) comes from expanding the spec without running
anything. The time estimate comes from a probe: for each size, one worker process builds the first
instance, solves its original problem, and runs one trial at the smallest and one at the largest k
of the grid (first projector, replicate 0). Work per size is then

    instances * t_original + trials * (t_trial(k_min) + t_trial(k_max)) / 2,

a linear interpolation in k that is rough by design; divide by the workers for the wall time.

Design advice (:func:`calib.verdicts.scope.design_advice`), per size, at the default target of
``calib tables`` (success 0.9 at 95% confidence): whether the instances x replicates of the spec can
certify the target for the instances measured and for the class, and the smallest change that
would (more replicates for an instances-only claim, more instances for the class).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

from calib.families import get as get_family
from calib.keys import canonical_json
from calib.sweep.expansion import instance_refs
from calib.sweep.kgrid import skipped_ks
from calib.sweep.runner import retrieval_names
from calib.sweep.spec import Spec
from calib.trial import InstanceRef, Trial
from calib.wording import byte_size, counted


@dataclass
class SizePlan:
    """The trials of one (family, size, parameters) cell of the spec, and the rows they store.

    ``label`` names the family and size, plus the parameters that tell it apart from another cell
    of the same family and size (set by :func:`size_plans`); ``retrievals`` is the number of
    retrievals of the family's kind (one stored row per trial and retrieval); ``skipped`` the k
    values of the grid above the size's projected dimension ``m``.
    """

    family: str
    params: dict
    instances: int
    ks: list
    labels: list
    trials: int
    retrievals: int = 1
    skipped: tuple = ()
    m: int = 0
    label: str = ""

    @property
    def rows(self) -> int:
        return self.trials * self.retrievals


def size_plans(spec: Spec) -> list[SizePlan]:
    """One :class:`SizePlan` per (family, size, parameters) in spec order."""
    plans: dict[str, SizePlan] = {}
    per_instance = len(spec.projectors) * spec.replicates
    for ref, ks, labels in instance_refs(spec):
        key = f"{ref.family}|{canonical_json(ref.params)}"
        if key not in plans:
            family = get_family(ref.family)
            plans[key] = SizePlan(ref.family, ref.params, 0, ks, labels, 0,
                                  len(retrieval_names(family.kind, spec.retrievals)),
                                  tuple(skipped_ks(spec.k_grid, family, ref.params)), family.projected_dim(ref.params))
        plans[key].instances += 1
        plans[key].trials += per_instance * _k_count(spec, ks)
    _label(list(plans.values()))
    return list(plans.values())


def _label(plans: list[SizePlan]) -> None:
    """Set each plan's label: family and size, and the parameters that differ within the same family and size."""
    groups: dict[str, list[SizePlan]] = {}
    for plan in plans:
        plan.label = f"{plan.family} " + get_family(plan.family).size_label(plan.params)
        groups.setdefault(plan.label, []).append(plan)
    for same in groups.values():
        if len(same) == 1:
            continue
        keys = sorted({key for plan in same for key in plan.params})
        varying = [key for key in keys if len({canonical_json(plan.params.get(key)) for plan in same}) > 1]
        for plan in same:
            plan.label += " " + ",".join(f"{key}={canonical_json(plan.params.get(key))}" for key in varying)


def machine_memory() -> int:
    """Bytes of physical memory of this machine (POSIX sysconf)."""
    import os

    return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")


def check_memory(plans: list[SizePlan], available: Optional[int] = None) -> None:
    """Refuse, before anything is built, a size whose data alone would not fit in memory.

    The estimate is the family's own (:attr:`calib.families.base.Family.memory`), from the sizes;
    families without one are not checked.
    """
    from calib.errors import InputError

    available = machine_memory() if available is None else available
    for plan in plans:
        estimate = get_family(plan.family).memory
        needed = estimate(plan.params) if estimate is not None else None
        if needed is not None and needed > available:
            raise InputError(plan.label, f"needs about {byte_size(needed)} to build (its data alone, estimated from "
                             f"the sizes), more than the {byte_size(available)} of memory of this machine",
                             "choose smaller sizes or a density below 1")


def skipped_lines(plans: list[SizePlan]) -> list[str]:
    """One line per k of the grid that a size skips because it exceeds its projected dimension."""
    return [f"k = {k} skipped for {plan.label}: above its projected dimension {plan.m}"
            for plan in plans for k in plan.skipped]


@dataclass
class Probe:
    """Measured wall seconds of one original solve and of trials at the smallest and largest k."""

    original: Optional[float]
    trial_low: Optional[float]
    trial_high: Optional[float]
    note: str = ""

    def work(self, plan: SizePlan) -> Optional[float]:
        if None in (self.original, self.trial_low, self.trial_high):
            return None
        return plan.instances * self.original + plan.trials * (self.trial_low + self.trial_high) / 2.0


def probe_sizes(spec: Spec, plans: list[SizePlan]) -> list[Probe]:
    """Time one original and two trials per size in a fresh worker process (with the time limit)."""
    import time

    from calib.sweep.sandbox import Sandbox
    from calib.sweep.tasks import Failure, ORIGINAL_FIELDS, OriginalTask, TrialTask

    box = Sandbox()
    box.wait_ready()
    timeout = spec.solver["trial_timeout_s"]
    probes = []

    def timed(task):
        nonlocal box
        start = time.perf_counter()
        result = box.run(task.token, task, timeout)
        if isinstance(result, Failure):
            box = box.renewed()
            box.wait_ready()
            return None, f"{result.status}: {result.message}"
        return (time.perf_counter() - start, result), ""

    try:
        for plan in plans:
            ref = InstanceRef(plan.family, plan.params, 0, spec.root_seed)
            measured, note = timed(OriginalTask(ref, spec.solver, spec.plugins))
            if measured is None:
                probes.append(Probe(None, None, None, note))
                continue
            seconds, payload = measured
            original = {name: payload["row"][name] for name in ORIGINAL_FIELDS}
            if original["orig_status"] == "solver_failed":  # the build or the solve raised: its time means nothing
                probes.append(Probe(None, None, None, f"the original failed: {original['orig_message']}"))
                continue
            trial_seconds = []
            for k, label in ((plan.ks[0], plan.labels[0]), (plan.ks[-1], plan.labels[-1])):
                trial = Trial(ref, spec.projectors[0], k, 0, label)
                retrievals = tuple(retrieval_names(get_family(ref.family).kind, spec.retrievals))
                result, note = timed(TrialTask(trial, retrievals, spec.solver, original, spec.plugins))
                trial_seconds.append(None if result is None else result[0])
            probes.append(Probe(seconds, trial_seconds[0], trial_seconds[1], note))
    finally:
        box.close()
    return probes


#: the target the advice is given for: the defaults of `calib tables` (success 1 - 0.1 at 95%)
ADVICE_TARGET, ADVICE_CONFIDENCE = 0.9, 0.95


def advice_lines(spec: Spec, plans: list[SizePlan]) -> list[str]:
    """Per size: what the design can certify under each scope, and the smallest change that would.

    A size of a fixed family is one problem (a file): its trials at a k are its instances x
    replicates draws of the projection, so the advice speaks of replicates, and the class is the
    folder, with the files as its units (:func:`file_advice`)."""
    from calib.verdicts.scope import advice_text, design_advice

    if spec.k_grid.is_search:
        return search_advice_lines(spec, plans)
    lines = [f"design (target {ADVICE_TARGET:.0%} success at {ADVICE_CONFIDENCE:.0%} confidence, the defaults of "
             f"`calib tables`):"]
    for plan in plans:
        if get_family(plan.family).fixed:
            lines.append(f"  {plan.label}: {_file_text(plan.instances, spec.replicates, 1)}")
            continue
        advice = design_advice(plan.instances, spec.replicates, ADVICE_TARGET, ADVICE_CONFIDENCE)
        lines.append(f"  {plan.label}: {advice_text(advice, ADVICE_TARGET, ADVICE_CONFIDENCE)}")
    for label, (files, instances) in _file_classes(plans).items():
        lines.append(f"  {label}: {file_advice(files, instances, spec.replicates)}")
    return lines


def search_need(spec: Spec, plan: SizePlan):
    """The :class:`calib.sweep.search.CapNeed` of the k search of one size of a search spec."""
    from calib.sweep.search import cap_need

    m = get_family(plan.family).projected_dim(plan.params)
    top = m - 1 if spec.k_grid.extend else None  # the search goes on above high up to m - 1 (calib.sweep.search)
    return cap_need(plan.ks[0], plan.ks[-1], spec.target.rate, spec.target.confidence, spec.k_grid.step, top=top)


def search_advice_lines(spec: Spec, plans: list[SizePlan]) -> list[str]:
    """Per size of a k search: whether its cap of trials per k (instances x replicates) lets a k pass
    the search's own looks, and the replicates it needs when not; then what the class scope of the
    table made from the store can certify."""
    from calib.sweep.search import cap_text
    from calib.verdicts.scope import design_advice

    target, level = spec.target, f"{spec.target.rate:.0%} at {spec.target.confidence:.0%}"
    lines = [f"design (the k search's target: {level}):"]
    for plan in plans:
        need, cap = search_need(spec, plan), plan.instances * spec.replicates
        if cap < need.trials:
            replicates = math.ceil(need.trials / plan.instances)
            search = f"the k search cannot pass any k: {cap_text(need, cap)}: use replicates = {replicates}"
        else:
            search = (f"the k search can pass a k (cap {cap} trials per k; its bisection's look at level "
                      f"{need.bisection_level:.4g} needs {need.bisection} successes in a row, the walk's at "
                      f"{need.walk_level:.4g} {need.walk})")
        advice = design_advice(plan.instances, spec.replicates, target.rate, target.confidence)
        klass = (f"the class: can certify {level}" if advice["class_sure"] else
                 f"the class: sure only with {advice['needed']} instances (add {advice['instances_to_add']})")
        lines.append(f"  {plan.label}: {search}; {klass}")
    return lines


def search_warning(spec: Spec, plans: list[SizePlan]) -> Optional[str]:
    """One line when the cap of some searched size is too small for any k to pass, else None."""
    if not spec.k_grid.is_search:
        return None
    short = [(plan, search_need(spec, plan)) for plan in plans
             if plan.instances * spec.replicates < search_need(spec, plan).trials]
    if not short:
        return None
    plan, need = short[0]
    return (f"warning: {len(short)} of {counted(len(plans), 'size')} cannot pass any k of their search: "
            f"{plan.label}: the cap of {plan.instances * spec.replicates} trials per k is below the {need.trials} "
            f"a pass needs; use replicates = {math.ceil(need.trials / plan.instances)} (`calib run --dry-run`)")


def _file_text(instances: int, replicates: int, files: int) -> str:
    """Whether instances x replicates trials per k of each of ``files`` files can certify the target on
    every file (a file is one problem: more trials are more replicates)."""
    from calib.verdicts.stats import trials_per_unit_needed

    needed = trials_per_unit_needed(files, ADVICE_TARGET, ADVICE_CONFIDENCE)
    draws = instances * replicates
    whom = "this file" if files == 1 else f"each of these {files} files (Bonferroni)"
    if draws >= needed:
        return f"{whom}: can certify {ADVICE_TARGET:.0%} at {ADVICE_CONFIDENCE:.0%} ({draws} trials per k)"
    return (f"{whom}: cannot certify {ADVICE_TARGET:.0%} at {ADVICE_CONFIDENCE:.0%} ({draws} trials per k, {needed} needed): "
            f"use replicates = {math.ceil(needed / instances)}")


def file_advice(files: int, instances: int, replicates: int) -> str:
    """The two scopes of a folder's rule k = f m (or k = C ln n): these files, in replicates; the class, in files.

    >>> file_advice(3, 1, 3)
    '3 files: the rule for these files: each of these 3 files (Bonferroni): cannot certify 90% at 95% (3 trials per k, 39 needed): use replicates = 39; the rule for the class (files as the unit): use 29 files (add 26)'
    """
    from calib.verdicts.scope import instances_needed

    needed = instances_needed(ADVICE_TARGET, ADVICE_CONFIDENCE)
    klass = ("can certify it" if files >= needed else f"use {needed} files (add {needed - files})")
    return (f"{counted(files, 'file')}: the rule for these files: {_file_text(instances, replicates, files)}; "
            f"the rule for the class (files as the unit): {klass}")


def _file_classes(plans: list[SizePlan]) -> dict[str, tuple[int, int]]:
    """Classes whose sizes are files (a folder alone): class label -> (files, fewest instances of a file)."""
    from calib.families import get

    classes: dict[str, tuple[int, int]] = {}
    for plan in plans:
        family = get(plan.family)
        if family.fixed and family.expand is not None:
            rest = {key: value for key, value in plan.params.items() if key not in family.size_keys}
            label = f"{plan.family} " + ",".join(f"{key}={value}" for key, value in sorted(rest.items()))
            files, instances = classes.get(label, (0, plan.instances))
            classes[label] = (files + 1, min(instances, plan.instances))
    return classes


def design_warning(spec: Spec, plans: list[SizePlan]) -> Optional[str]:
    """One line when some size cannot surely certify the target for the class, else None (sizes that
    are files are left out: their class is the folder, see :func:`advice_lines`)."""
    from calib.verdicts.scope import design_advice

    short = [plan for plan in plans if not get_family(plan.family).fixed
             and not design_advice(plan.instances, spec.replicates, ADVICE_TARGET, ADVICE_CONFIDENCE)["class_sure"]]
    if not short:
        return None
    needed = design_advice(1, 1, ADVICE_TARGET, ADVICE_CONFIDENCE)["needed"]
    return (f"warning: {len(short)} of {counted(len(plans), 'size')} have fewer than {needed} instances, so their class answer "
            f"({ADVICE_TARGET:.0%} at {ADVICE_CONFIDENCE:.0%}) can be empty; `calib run --dry-run` says per size what "
            f"would certify it")


def _k_count(spec: Spec, ks: list) -> int:
    """k values a size runs: the grid's, or for a k search its most bisection k values plus one k of
    the walk down (a planning figure: a flat success curve walks further, see :data:`WALK_NOTE`)."""
    from calib.sweep.search import max_looks

    if not spec.k_grid.is_search:
        return len(ks)
    return max_looks(ks[0], ks[-1], spec.k_grid.step) + (1 if ks[-1] > ks[0] else 0)


#: how the dry run counts a k search's walk down
WALK_NOTE = ("a k search counts its bisection at its cap and one k of its walk down; each further k the walk "
             "passes costs instances x replicates trials more (a flat success curve walks further, at most "
             "down to the low end)")


def _k_range(ks: list, spec: Spec) -> str:
    from calib.sweep.search import max_looks

    if spec.k_grid.is_search:
        step = f", step {spec.k_grid.step}" if spec.k_grid.step > 1 else ""
        return (f"a k search in {ks[0]}..{ks[-1]}{step} (at most {max_looks(ks[0], ks[-1], spec.k_grid.step)} "
                f"bisection k values, then a walk down)")
    return f"k={ks[0]}" if len(ks) == 1 else f"{len(ks)} k in {ks[0]}..{ks[-1]}"


def render_plan(spec: Spec, plans: list[SizePlan], probes: Optional[list[Probe]], stored: int, store_note: str,
                workers: int) -> str:
    """The dry-run report: counts per size, the probe times and the work estimate."""
    instances = sum(plan.instances for plan in plans)
    trials = sum(plan.trials for plan in plans)
    rows = sum(plan.rows for plan in plans)
    bound = "up to " if spec.k_grid.is_search else ""  # a search usually stops far below its cap
    lines = [f"campaign {spec.name}: {counted(instances, 'instance')}, {bound}{counted(trials, 'trial')} "
             f"({bound}{counted(rows, 'stored row')}: one per trial and retrieval of its kind)",
             f"store: {store_note}"]
    for plan in plans:
        lines.append(f"  {plan.label}: {counted(plan.instances, 'instance')} x {counted(len(spec.projectors), 'projector')} x "
                     f"{_k_range(plan.ks, spec)} x {counted(spec.replicates, 'replicate')} = "
                     f"{bound}{counted(plan.trials, 'trial')} x {counted(plan.retrievals, 'retrieval')} = "
                     f"{bound}{counted(plan.rows, 'row')}")
    if spec.k_grid.is_search:
        lines.append(f"  ({WALK_NOTE})")
    lines += skipped_lines(plans)
    lines += advice_lines(spec, plans)
    if probes is None:
        lines.append("estimate: not measured (--no-probe)")
        return "\n".join(lines)
    lines.append("probe (wall seconds in one worker: original solve; trial at the smallest / largest k):")
    total = 0.0
    for plan, probe in zip(plans, probes):
        if probe.work(plan) is None:
            lines.append(f"  {plan.label}: probe failed ({probe.note})")
            total = float("nan")
            continue
        lines.append(f"  {plan.label}: original {probe.original:.3f} s; trial {probe.trial_low:.3f} / {probe.trial_high:.3f} s")
        total += probe.work(plan)
    remaining = total * (trials - stored) / trials if trials else 0.0
    if remaining != remaining:  # NaN: a size could not be probed
        lines.append(f"work: unknown for the {trials - stored} trials left (a probe failed, see above)")
        return "\n".join(lines)
    lines.append(f"work: about {remaining:.1f} CPU-seconds for the {trials - stored} trials left; "
                 f"about {remaining / max(1, workers):.1f} s of wall time on {counted(workers, 'worker')}")
    return "\n".join(lines)
