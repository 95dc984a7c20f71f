"""Sweep specifications: a TOML document in, a validated :class:`Spec` out.

The schema, every key with its type, default and range, is documented in ``docs/spec.md``.
In short::

    [campaign]
    name = "quickstart"        # letters, digits, '-', '_'; names the store file
    root_seed = 20261201       # one integer root seed for the whole campaign (required)
    replicates = 10            # independent projector draws per (instance, projector, k)

    [[families]]               # one table per family
    name = "lp-planted"        # a registered family
    sizes = [{rows = 60, cols = 120}]
    instances = 3              # instances per size
    params = {support = 0.5}   # optional, non-size parameters

    [sweep]
    projectors = ["gaussian"]  # names, or tables {name = "...", option = value}
    k = [8, 16, 32]            # or {fractions = [0.1, 0.2]} of the projected dimension,
                               # or {log_multiples = [4, 8]}: k = ceil(C ln n) per size,
                               # or {eps = [0.5, 0.3], rule = "dasgupta-gupta"},
                               # or {search = {low = 8, high = 64}} (also low_fraction/high_fraction)
    retrievals = ["basis-lstsq"]

    [target]                   # only with k = {search = ...}: the success rule the search certifies
    preset = "bound"           # a preset of calib.verdicts.success
    tolerance = 0.05           # its primary tolerance (omit for "classify")
    delta = 0.1                # target success rate 1 - delta
    confidence = 0.95          # confidence of the final claim

    [solver]
    time_limit_s = 60          # per solve, enforced by the solver itself
    trial_timeout_s = 180      # per task, enforced from outside (the worker is killed)
    highs = {presolve = "off"} # optional HiGHS options for every solve

This module reads the document: ``[campaign]``, ``[[families]]`` (each size resolved by its
family), ``sweep.projectors`` (each tried once on a 16 x 64 draw) and ``sweep.retrievals``; the other
tables have modules of their own: ``sweep.k`` :mod:`calib.sweep.kgrid`, ``[solver]``
:mod:`calib.solvers.settings`, ``[target]`` :mod:`calib.verdicts.target`. Expanding a spec into
trials is :mod:`calib.sweep.expansion`.

Validation collects every problem with its field path (``families[0].sizes[1].rows``) and the
fix (:class:`calib.spec_problems.ProblemList`), and raises one
:class:`~calib.spec_problems.SpecError` listing them all. Costs: O(spec size) plus one small
projector draw per projector and one HiGHS object per ``[solver.highs]`` option.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from calib.errors import InputError
from calib.keys import canonical_json, stable_id
from calib.solvers.settings import parse_solver
from calib.spec_problems import ProblemList, SpecError
from calib.sweep.kgrid import KGrid, check_grid, parse_k
from calib.trial import ProjectorChoice
from calib.verdicts.target import SearchTarget, parse_target

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")


@dataclass(frozen=True)
class FamilyCell:
    """One ``[[families]]`` table: the family's name, its sizes (full parameter dicts, defaults filled
    in) and the instances drawn per size."""

    name: str
    sizes: tuple  # of dicts (full params, defaults filled)
    instances: int


@dataclass
class Spec:
    """A validated sweep spec (see ``docs/spec.md``).

    ``solver`` holds ``time_limit_s`` (seconds per solve), ``trial_timeout_s`` (seconds per task,
    enforced from outside the solver) and optionally ``highs`` (extra HiGHS options). ``plugins``
    lists the ``CALIB_PLUGINS`` modules the spec was validated with.
    """

    name: str
    root_seed: int
    replicates: int
    families: list[FamilyCell]
    projectors: list[ProjectorChoice]
    k_grid: KGrid
    retrievals: list[str]
    solver: dict
    source: str = ""
    raw: dict = field(default_factory=dict, repr=False)
    plugins: tuple = ()
    target: Optional[SearchTarget] = None

    @property
    def fingerprint(self) -> str:
        """Hash of the canonical spec content: equal specs give equal fingerprints."""
        return stable_id(self.raw, 32)


def load_spec(path: str | Path) -> Spec:
    """Read and validate a TOML spec file; raises :class:`InputError`/:class:`SpecError`."""
    path = Path(path)
    if not path.is_file():
        raise InputError(str(path), "no such spec file", "give the path to a TOML sweep spec")
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))  # a BOM from Windows editors is fine
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as error:
        raise InputError(str(path), f"not valid TOML: {error}", "fix the syntax at the position shown") from None
    except OSError as error:
        raise InputError(str(path), f"cannot read the spec: {error.strerror or error}", "check the file's permissions") from None
    return parse_spec(raw, source=str(path))


def parse_spec(raw: dict, source: str = "spec") -> Spec:
    """Validate a spec dictionary (the parsed TOML) into a :class:`Spec`."""
    from calib import families as family_registry
    from calib.sweep.plugins import load_from_env

    plugins = load_from_env()
    errors = ProblemList()
    errors.unknown_keys(raw, {"campaign", "families", "sweep", "solver", "target"}, "spec")
    campaign = errors.table(raw, "campaign", "campaign")
    errors.unknown_keys(campaign, {"name", "root_seed", "replicates", "description"}, "campaign")
    name = campaign.get("name")
    if not isinstance(name, str) or not _NAME.match(name):
        errors.add("campaign.name", f"must be 1-64 letters, digits, '-' or '_', got {name!r}", 'e.g. name = "covering-small"')
    root_seed = errors.integer(campaign, "root_seed", "campaign.root_seed", 0)
    replicates = errors.integer(campaign, "replicates", "campaign.replicates", 1, default=1)

    cells = _parse_families(raw.get("families"), errors, family_registry)
    sweep = errors.table(raw, "sweep", "sweep")
    errors.unknown_keys(sweep, {"projectors", "k", "retrievals"}, "sweep")
    projectors = _parse_projectors(sweep.get("projectors"), errors)
    k_grid = parse_k(sweep.get("k"), errors)
    kinds = {family_registry.get(cell.name).kind for cell in cells}
    retrievals = _parse_retrievals(sweep.get("retrievals"), kinds, errors)
    solver = parse_solver(raw.get("solver", {}), errors)
    target = parse_target(raw.get("target"), k_grid.is_search, errors)
    for kind in sorted(kinds):
        if target is not None and not target.predicate.covers(kind):
            errors.add("target.preset", f"preset {target.predicate.name!r} decides nothing on {kind} problems",
                       "choose a preset that checks this kind (calib tables --help lists them)")
    if not errors.problems:
        check_grid(cells, k_grid, errors, family_registry)
    if errors.problems:
        raise SpecError(source, errors.problems)
    return Spec(name=name, root_seed=root_seed, replicates=replicates, families=cells, projectors=projectors,
                k_grid=k_grid, retrievals=retrievals, solver=solver, source=source,
                raw=raw, plugins=plugins, target=target)


def _parse_families(value, errors: ProblemList, registry) -> list[FamilyCell]:
    if not isinstance(value, list) or not value:
        errors.add("families", "missing, empty or not a list of tables", "add at least one [[families]] table")
        return []
    cells, seen = [], {}
    for index, table in enumerate(value):
        path = f"families[{index}]"
        if not isinstance(table, dict):
            errors.add(path, "must be a table", "write it as [[families]]")
            continue
        errors.unknown_keys(table, {"name", "sizes", "instances", "params"}, path)
        name = table.get("name")
        if not isinstance(name, str):
            errors.add(f"{path}.name", f"must be a family name (text), got {name!r}", f"choose one of {', '.join(sorted(registry.REGISTRY))}")
            continue
        try:
            family = registry.get(name, f"{path}.name")
        except InputError as error:
            errors.add(error.where, error.problem, error.fix)
            continue
        instances = errors.integer(table, "instances", f"{path}.instances", 1, default=1)
        params = table.get("params", {})
        if not isinstance(params, dict):
            errors.add(f"{path}.params", "must be a table", "write params = {key = value}")
            params = {}
        sizes = table.get("sizes", [{}] if not family.size_keys or family.expand is not None else None)
        if not isinstance(sizes, list) or not sizes:
            errors.add(f"{path}.sizes", "missing or empty", f"give a list of sizes like [{{{', '.join(k + ' = ...' for k in family.size_keys)}}}]")
            continue
        resolved = []
        for size_index, size in enumerate(sizes):
            size_path = f"{path}.sizes[{size_index}]"
            if not isinstance(size, dict):
                errors.add(size_path, "must be a table", "write {rows = 100, cols = 200}")
                continue
            try:
                expanded = family.sizes({**params, **size}, size_path)
            except InputError as error:
                errors.add(error.where, error.problem, error.fix)
                continue
            for full in expanded:
                key = (name, canonical_json(full))
                if key in seen:
                    errors.add(size_path, f"duplicate of {seen[key]} (same family and parameters, so the same trials)",
                               "list each size of a family once")
                    continue
                seen[key] = size_path
                resolved.append(full)
        if instances is not None:
            cells.append(FamilyCell(name=name, sizes=tuple(resolved), instances=instances))
    return cells


def _parse_projectors(value, errors: ProblemList) -> list[ProjectorChoice]:
    from calib import projectors

    if not isinstance(value, list) or not value:
        errors.add("sweep.projectors", f"must be a non-empty list, got {value!r}", f"list some of {', '.join(projectors.names())}")
        return []
    choices = []
    for index, entry in enumerate(value):
        path = f"sweep.projectors[{index}]"
        if isinstance(entry, str):
            entry = {"name": entry}
        if not isinstance(entry, dict) or not isinstance(entry.get("name"), str):
            errors.add(path, "must be a name or a table with a name", 'e.g. "gaussian" or {name = "sparse-jl", s = 4}')
            continue
        try:
            projectors.check_name(entry["name"], path)
        except InputError as error:
            errors.add(error.where, error.problem, error.fix)
            continue
        options = tuple(sorted((key, val) for key, val in entry.items() if key != "name"))
        problem = _projector_problem(entry["name"], dict(options))
        if problem:
            errors.add(path, problem, "check the option names and values of this projector")
            continue
        choice = ProjectorChoice(entry["name"], options)
        if choice in choices:
            errors.add(path, f"duplicate projector {choice.label!r}", "list each projector once")
        choices.append(choice)
    return choices


def _projector_problem(name: str, options: dict) -> str:
    """Why ``name`` with ``options`` cannot be drawn, or "" when it can.

    Tried once on a small 16 x 64 shape, which every option value meant for real grids should
    accept; projectors validate their own options at this public edge.
    """
    from calib import projectors

    try:
        projectors.make(name, 16, 64, seed=0, **options)
    except (InputError, TypeError, ValueError) as error:
        return f"projector {name!r} rejects options {options}: {error}"
    return ""


def _parse_retrievals(value, kinds: set, errors: ProblemList) -> list[str]:
    from calib.reduce import HANDLERS

    known = sorted({name for kind in kinds if kind in HANDLERS for name in HANDLERS[kind].retrievals})
    for kind in sorted(kinds - set(HANDLERS)):
        errors.add("families", f"no reduction for problem kind {kind!r} yet", "remove those families from this spec")
    if value is None:  # each kind's default retrieval
        return sorted({HANDLERS[kind].default_retrieval for kind in kinds if kind in HANDLERS})
    if not isinstance(value, list) or not value:
        errors.add("sweep.retrievals", f"must be a non-empty list, got {value!r}", f"choose from {', '.join(known)}")
        return []
    bad = [index for index, name in enumerate(value) if not isinstance(name, str) or name not in known]
    for index in bad:
        errors.add(f"sweep.retrievals[{index}]", f"unknown retrieval {value[index]!r}", f"choose from {', '.join(known)}")
    if bad:
        return []
    if len(set(value)) != len(value):
        errors.add("sweep.retrievals", "has duplicates", "list each retrieval once")
    return list(value)
