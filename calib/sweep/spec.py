"""Sweep specifications: TOML in, a validated :class:`Spec` out, expanded into trials.

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
    preset = "bound"           # a preset of calib.analysis.success
    tolerance = 0.05           # its primary tolerance (omit for "classify")
    delta = 0.1                # target success rate 1 - delta
    confidence = 0.95          # confidence of the final claim

    [solver]
    time_limit_s = 60          # per solve, enforced by the solver itself
    trial_timeout_s = 180      # per task, enforced from outside (the worker is killed)
    highs = {presolve = "off"} # optional HiGHS options for every solve

Validation collects every problem with its field path (``families[0].sizes[1].rows``) and the
fix, and raises one :class:`SpecError` listing them all.
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Optional

from calib.checks import is_integer, is_real
from calib.errors import InputError
from calib.keys import canonical_json, stable_id, stable_key

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")


class SpecError(InputError):
    """One or more problems in a spec; the message lists each with its field path."""

    def __init__(self, source: str, problems: list[tuple[str, str, str]]):
        self.problems = problems
        parts = [f"{path}: {problem}" + (f" ({fix})" if fix else "") for path, problem, fix in problems]
        count = f"{len(problems)} problems: " if len(problems) > 1 else ""
        super().__init__(source, count + "; ".join(parts))


@dataclass(frozen=True)
class ProjectorChoice:
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
class KGrid:
    """How k is chosen: absolute values, fractions of the projected dimension, multiples C of ln n
    (k = ceil(C ln n), n the family's JL point count), eps with a rule, or a search range ``values = (low, high)`` in k ("search") or in fractions of m ("search-fractions")."""

    mode: str  # "absolute" | "fractions" | "log-multiples" | "eps" | "search" | "search-fractions"
    values: tuple
    rule: Optional[str] = None
    step: int = 1  # a search's lattice of k: low, low + step, ... (the resolution of its answer)

    @property
    def is_search(self) -> bool:
        return self.mode.startswith("search")


@dataclass(frozen=True)
class SearchTarget:
    """What a k search certifies: success rate >= 1 - ``delta`` under ``predicate``, at ``confidence``."""

    predicate: Any  # calib.analysis.success.Predicate
    delta: float
    confidence: float

    @property
    def rate(self) -> float:
        return 1.0 - self.delta


@dataclass(frozen=True)
class FamilyCell:
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


class _Collector:
    def __init__(self) -> None:
        self.problems: list[tuple[str, str, str]] = []

    def add(self, path: str, problem: str, fix: str = "") -> None:
        self.problems.append((path, problem, fix))

    def table(self, raw: dict, key: str, path: str) -> dict:
        value = raw.get(key)
        if value is None:
            self.add(path, "missing table", f"add a [{key}] table")
            return {}
        if not isinstance(value, dict):
            self.add(path, f"must be a table, got {type(value).__name__}", f"write it as [{key}]")
            return {}
        return value

    def integer(self, table: dict, key: str, path: str, minimum: int, default: Any = None) -> Optional[int]:
        value = table.get(key, default)
        if value is None:
            self.add(path, "missing", f"set {key} to an integer >= {minimum}")
            return None
        if not is_integer(value):
            self.add(path, f"must be an integer, got {value!r}", f"set {key} to an integer >= {minimum}")
            return None
        if value < minimum:
            self.add(path, f"must be >= {minimum}, got {value}", f"set {key} to an integer >= {minimum}")
            return None
        return value

    def unknown_keys(self, table: dict, allowed: set, path: str) -> None:
        for key in sorted(set(table) - allowed):
            self.add(f"{path}.{key}", "unknown key", f"allowed keys: {', '.join(sorted(allowed))}")


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
    errors = _Collector()
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
    k_grid = _parse_k(sweep.get("k"), errors)
    kinds = {family_registry.get(cell.name).kind for cell in cells}
    retrievals = _parse_retrievals(sweep.get("retrievals"), kinds, errors)
    solver = _parse_solver(raw.get("solver", {}), errors)
    target = _parse_target(raw.get("target"), k_grid, errors)
    for kind in sorted(kinds):
        if target is not None and not target.predicate.covers(kind):
            errors.add("target.preset", f"preset {target.predicate.name!r} decides nothing on {kind} problems",
                       "choose a preset that checks this kind (calib tables --help lists them)")
    if not errors.problems:
        _check_grid(cells, k_grid, errors, family_registry)
    if errors.problems:
        raise SpecError(source, errors.problems)
    return Spec(name=name, root_seed=root_seed, replicates=replicates, families=cells, projectors=projectors,
                k_grid=k_grid, retrievals=retrievals, solver=solver, source=source,
                raw=raw, plugins=plugins, target=target)


def _parse_families(value, errors: _Collector, registry) -> list[FamilyCell]:
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


def _parse_projectors(value, errors: _Collector) -> list[ProjectorChoice]:
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


def _number_list(values, path: str, errors: _Collector, check, fix: str) -> tuple:
    if not isinstance(values, list) or not values:
        errors.add(path, "must be a non-empty list", fix)
        return ()
    good = []
    for index, value in enumerate(values):
        if not is_real(value) or not math.isfinite(value) or not check(value):
            errors.add(f"{path}[{index}]", f"invalid value {value!r}", fix)
        else:
            good.append(value)
    if len(set(good)) != len(good):
        errors.add(path, "has duplicate values", "list each value once")
    return tuple(good)


def _parse_k(value, errors: _Collector) -> KGrid:
    from calib.theory import RULES

    if isinstance(value, list):
        ints = _number_list(value, "sweep.k", errors, lambda v: isinstance(v, int) and v >= 1, "k values are integers >= 1")
        return KGrid("absolute", tuple(sorted(ints)))
    if isinstance(value, dict):
        if set(value) == {"fractions"}:
            fr = _number_list(value["fractions"], "sweep.k.fractions", errors, lambda v: 0 < v <= 1, "fractions lie in (0, 1]")
            return KGrid("fractions", tuple(sorted(fr)))
        if set(value) == {"log_multiples"}:
            cs = _number_list(value["log_multiples"], "sweep.k.log_multiples", errors, lambda v: v > 0,
                              "multiples C of ln n are numbers > 0 (k = ceil(C ln n))")
            return KGrid("log-multiples", tuple(sorted(cs)))
        if "eps" in value and set(value) <= {"eps", "rule"}:
            rule = value.get("rule", "dasgupta-gupta")
            if not isinstance(rule, str) or rule not in RULES:
                errors.add("sweep.k.rule", f"unknown rule {rule!r}", f"choose one of {', '.join(sorted(RULES))}")
            eps = _number_list(value["eps"], "sweep.k.eps", errors, lambda v: 0 < v < 1, "eps values lie in (0, 1)")
            return KGrid("eps", tuple(sorted(eps, reverse=True)), rule)
        if set(value) == {"search"}:
            return _parse_search(value["search"], errors)
    errors.add("sweep.k", f"cannot read {value!r}", "use k = [8, 16], k = {fractions = [0.1, 0.2]}, "
               "k = {log_multiples = [4, 8]}, "
               "k = {eps = [0.3], rule = \"dasgupta-gupta\"} or k = {search = {low = 8, high = 64}}")
    return KGrid("absolute", ())


_SEARCH_FIX = ("write k = {search = {low = 8, high = 64}} (integers, low < high) or {search = {low_fraction = 0.05, "
               "high_fraction = 0.5}}, optionally with step = 2 (the resolution of the answer)")


def _parse_search(value, errors: _Collector) -> KGrid:
    """``{low, high}`` (integers 1 <= low < high) or ``{low_fraction, high_fraction}`` (0 < low < high <= 1),
    with an optional ``step`` (integer >= 1, default 1): the lattice low, low + step, ... of k tested."""
    path = "sweep.k.search"
    ends = set(value) - {"step"} if isinstance(value, dict) else None
    if not isinstance(value, dict) or ends not in ({"low", "high"}, {"low_fraction", "high_fraction"}):
        errors.add(path, f"cannot read {value!r}", _SEARCH_FIX)
        return KGrid("search", ())
    step = value.get("step", 1)
    if not is_integer(step) or step < 1:
        errors.add(f"{path}.step", f"invalid value {step!r}", "step is an integer >= 1 (1: every k)")
        step = 1
    fractions = "low_fraction" in value
    keys = ("low_fraction", "high_fraction") if fractions else ("low", "high")
    good = True
    for key in keys:
        item = value[key]
        if fractions:
            ok = is_real(item) and math.isfinite(item) and 0 < item <= 1
        else:
            ok = is_integer(item) and item >= 1
        if not ok:
            errors.add(f"{path}.{key}", f"invalid value {item!r}", "fractions lie in (0, 1]" if fractions else "k is an integer >= 1")
            good = False
    low, high = (value[key] for key in keys)
    if good and not low < high:
        errors.add(path, f"{keys[0]} = {low} is not below {keys[1]} = {high}", _SEARCH_FIX)
    return KGrid("search-fractions" if fractions else "search", (low, high), step=step)


#: keys of the [target] table
_TARGET_KEYS = {"preset", "tolerance", "delta", "confidence"}


def _parse_target(value, k_grid: KGrid, errors: _Collector) -> Optional[SearchTarget]:
    """The ``[target]`` table: required by a k search, refused without one (nothing else reads it)."""
    from calib.analysis.success import PRESETS, make_predicate, with_tau

    if value is None:
        if k_grid.is_search:
            errors.add("target", "missing table: a k search needs its success rule at run time",
                       'add [target] with preset = "bound", tolerance = 0.05, delta = 0.1, confidence = 0.95')
        return None
    if not isinstance(value, dict):
        errors.add("target", f"must be a table, got {type(value).__name__}", "write it as [target]")
        return None
    if not k_grid.is_search:
        errors.add("target", "only a k search reads [target]", "remove [target], or set k = {search = {low = ..., high = ...}}")
        return None
    errors.unknown_keys(value, _TARGET_KEYS, "target")
    preset = value.get("preset", "bound")
    if not isinstance(preset, str) or preset not in PRESETS:
        errors.add("target.preset", f"unknown preset {preset!r}", f"choose one of {', '.join(sorted(PRESETS))}")
        return None
    predicate = make_predicate(preset)
    if "tolerance" in value:
        tolerance = value["tolerance"]
        if not is_real(tolerance) or not (math.isfinite(tolerance) and tolerance > 0):
            errors.add("target.tolerance", f"must be a positive number, got {tolerance!r}", "e.g. tolerance = 0.05")
            return None
        try:
            predicate = with_tau(predicate, float(tolerance))
        except InputError:
            errors.add("target.tolerance", f"preset {preset!r} has no tolerance", "remove tolerance or choose another preset")
            return None
    numbers = {}
    for key, default, example in (("delta", 0.1, "0.1 for a 90% success target"), ("confidence", 0.95, "0.95")):
        number = value.get(key, default)
        if not is_real(number) or not 0 < number < 1:
            errors.add(f"target.{key}", f"must lie in (0, 1), got {number!r}", f"e.g. {key} = {example}")
            return None
        numbers[key] = float(number)
    return SearchTarget(predicate, numbers["delta"], numbers["confidence"])


def _parse_retrievals(value, kinds: set, errors: _Collector) -> list[str]:
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


def default_trial_timeout(time_limit_s: float) -> float:
    """Default ``trial_timeout_s``: 2 * time_limit_s + 60 seconds.

    A task runs at most one solve (the original, or the projected problem) plus building, sketching
    and retrieval, so this only fires on a real hang.

    >>> default_trial_timeout(60.0)
    180.0
    """
    return 2.0 * time_limit_s + 60.0


#: HiGHS options calib sets itself and a spec may not override
_RESERVED_HIGHS = {"threads": "calib runs one solver thread per worker", "time_limit": "use time_limit_s",
                   "solver": "choose LP methods with solver.methods and solver.projected", "output_flag": "workers stay quiet"}


def _seconds(table: dict, key: str, default, errors: _Collector) -> Optional[float]:
    value = table.get(key, default)
    if not is_real(value) or not (0 < value < 1e6):
        errors.add(f"solver.{key}", f"must be a positive number of seconds below 1e6, got {value!r}", f"e.g. {key} = 60")
        return None
    return float(value)


def _parse_solver(value, errors: _Collector) -> dict:
    if not isinstance(value, dict):
        errors.add("solver", "must be a table", "write [solver] with time_limit_s = 60")
        return {"time_limit_s": 60.0, "trial_timeout_s": default_trial_timeout(60.0)}
    errors.unknown_keys(value, {"time_limit_s", "trial_timeout_s", "highs", "scs", "methods", "projected",
                                "projected_time_limit_s", "projected_max_iters"}, "solver")
    limit = _seconds(value, "time_limit_s", 60.0, errors) or 60.0
    timeout = _seconds(value, "trial_timeout_s", default_trial_timeout(limit), errors)
    solver = {"time_limit_s": limit, "trial_timeout_s": timeout or default_trial_timeout(limit)}
    if "highs" in value:
        highs = _parse_highs(value["highs"], errors)
        if highs:
            solver["highs"] = highs
    if "scs" in value:
        scs_settings = _parse_scs(value["scs"], errors)
        if scs_settings:
            solver["scs"] = scs_settings
    _parse_methods(value, solver, errors)
    _parse_projected_caps(value, solver, errors)
    return solver


def _parse_methods(value: dict, solver: dict, errors: _Collector) -> None:
    """``methods`` (kind -> list, the fair baseline's race) and ``projected`` (kind -> method or auto)."""
    from calib.solvers.methods import check_methods, check_projected

    for key, check in (("methods", check_methods), ("projected", check_projected)):
        if key in value:
            try:
                checked = check(value[key], f"solver.{key}")
            except InputError as error:
                errors.add(error.where, error.problem, error.fix)
                continue
            solver[key] = {kind: list(names) if isinstance(names, tuple) else names for kind, names in checked.items()}


#: SCS settings a spec may set (the others are calib's: verbose, linear_solver, time_limit_secs)
SCS_SETTINGS = {"eps_abs": float, "eps_rel": float, "eps_infeas": float, "max_iters": int, "normalize": bool,
                "scale": float, "adaptive_scale": bool, "rho_x": float, "alpha": float, "acceleration_lookback": int}


def _parse_scs(value, errors: _Collector) -> dict:
    """Extra SCS settings for conic solves (SDPs, QPs by SCS): a table of the names in :data:`SCS_SETTINGS`."""
    if not isinstance(value, dict):
        errors.add("solver.scs", f"must be a table of SCS settings, got {value!r}", "e.g. scs = {eps_abs = 1e-7}")
        return {}
    good = {}
    for key, setting in sorted(value.items()):
        kind = SCS_SETTINGS.get(key)
        if kind is None:
            errors.add(f"solver.scs.{key}", "is not an SCS setting a spec may change", f"use one of {', '.join(sorted(SCS_SETTINGS))}")
        elif not (isinstance(setting, bool) if kind is bool else is_integer(setting) if kind is int else is_real(setting)):
            errors.add(f"solver.scs.{key}", f"must be a {kind.__name__}, got {setting!r}", "give one value of that type")
        else:
            good[key] = kind(setting)
    return good


def _parse_projected_caps(value: dict, solver: dict, errors: _Collector) -> None:
    """``projected_time_limit_s`` (seconds) and ``projected_max_iters`` (iterations): the caps of a
    projected solve (:func:`calib.reduce.base.projected_solver`); absent keys stay absent."""
    if "projected_time_limit_s" in value:
        seconds = _seconds(value, "projected_time_limit_s", None, errors)
        if seconds:
            solver["projected_time_limit_s"] = seconds
    if "projected_max_iters" in value:
        cap = value["projected_max_iters"]
        if not is_integer(cap) or not 1 <= cap <= 10**9:
            errors.add("solver.projected_max_iters", f"must be a whole number of iterations >= 1, got {cap!r}",
                       "e.g. projected_max_iters = 5000")
        else:
            solver["projected_max_iters"] = cap


def solver_settings(raw_solver) -> dict:
    """The ``[solver]`` settings a raw table puts in force (defaults filled in), as parsing gives them.

    >>> solver_settings({}) == solver_settings({"time_limit_s": 60})
    True
    """
    return _parse_solver(raw_solver if raw_solver is not None else {}, _Collector())


def _parse_highs(value, errors: _Collector) -> dict:
    """Extra HiGHS options: a table of scalars, each accepted by HiGHS itself (checked here)."""
    from calib.solvers.highs import new_highs

    if not isinstance(value, dict):
        errors.add("solver.highs", f"must be a table of HiGHS options, got {value!r}", 'e.g. highs = {presolve = "off"}')
        return {}
    good = {}
    for key, option in sorted(value.items()):
        path = f"solver.highs.{key}"
        if key in _RESERVED_HIGHS:
            errors.add(path, f"is set by calib ({_RESERVED_HIGHS[key]})", "remove it")
        elif isinstance(option, (dict, list)):
            errors.add(path, f"must be a number, boolean or text, got {option!r}", "give one value")
        else:
            try:
                new_highs({key: option})
            except (ValueError, TypeError) as error:
                errors.add(path, f"HiGHS rejects it: {error}", "see the HiGHS option list for names and types")
                continue
            good[key] = option
    return good


def _check_grid(cells, k_grid: KGrid, errors: _Collector, registry) -> None:
    for index, cell in enumerate(cells):
        for size_index, params in enumerate(cell.sizes):
            if not k_values(k_grid, registry.get(cell.name), params)[0]:
                problem = ("the search range starts above the projected dimension" if k_grid.is_search
                           else "no k of the grid fits this size (every k exceeds the projected dimension)")
                errors.add(f"families[{index}].sizes[{size_index}]", problem,
                           "add smaller k values or use k = {fractions = [...]}")


def k_values(k_grid: KGrid, family, params: dict) -> tuple[list[int], list[str]]:
    """The k values of the grid for one size, each with its provenance label.

    Values above the projected dimension m are dropped (no reduction); fractions round up and are
    at least 1; a multiple C of ln n gives k = ceil(C ln n) with n the family's point count (at least
    1); eps values go through the named rule with the family's point count. A search gives the ends
    of its range (see :func:`search_range`).
    """
    from calib.theory import k_from_eps

    m = family.projected_dim(params)
    if k_grid.is_search:
        bounds = search_range(k_grid, m)
        if bounds is None:
            return [], []
        label = "search" if k_grid.mode == "search" else f"search fractions={list(k_grid.values)}"
        return sorted(set(bounds)), [label] * len(set(bounds))
    pairs: dict[int, str] = {}
    for value in k_grid.values:
        if k_grid.mode == "absolute":
            k, label = int(value), ""
        elif k_grid.mode == "fractions":
            k, label = max(1, math.ceil(value * m - 1e-9)), f"fraction={value}"
        elif k_grid.mode == "log-multiples":
            k, label = log_multiple_k(value, family.n_points(params)), f"log_multiple={value}"
        else:
            k, label = k_from_eps(k_grid.rule, family.n_points(params), value), f"eps={value} ({k_grid.rule})"
        if k <= m and k not in pairs:
            pairs[k] = label
    ks = sorted(pairs)
    return ks, [pairs[k] for k in ks]


def skipped_ks(k_grid: KGrid, family, params: dict) -> list[int]:
    """The k values of the grid that :func:`k_values` drops for one size: above its projected dimension.

    A search's upper end above m is capped, not dropped, so a search skips nothing.
    """
    from calib.theory import k_from_eps

    if k_grid.is_search or k_grid.mode == "fractions":  # fractions of m never exceed it
        return []
    m = family.projected_dim(params)
    if k_grid.mode == "absolute":
        ks = [int(value) for value in k_grid.values]
    elif k_grid.mode == "log-multiples":
        ks = [log_multiple_k(value, family.n_points(params)) for value in k_grid.values]
    else:
        ks = [k_from_eps(k_grid.rule, family.n_points(params), value) for value in k_grid.values]
    return sorted({k for k in ks if k > m})


def log_multiple_k(multiple: float, n_points: int) -> int:
    """k = ceil(C ln n) for the multiple C of ln n and the point count n, at least 1.

    >>> log_multiple_k(4, 1000), log_multiple_k(0.1, 2)
    (28, 1)
    """
    return max(1, math.ceil(multiple * math.log(n_points) - 1e-9))


def search_range(k_grid: KGrid, m: int) -> Optional[tuple[int, int]]:
    """The integer range (low, high) a k search covers for projected dimension ``m``, or None.

    Fractions round up (at least 1); high is capped at m; None when low is above m.

    >>> search_range(KGrid("search", (8, 64)), 40)
    (8, 40)
    >>> search_range(KGrid("search-fractions", (0.05, 0.5)), 150)
    (8, 75)
    """
    if k_grid.mode == "search":
        low, high = (int(value) for value in k_grid.values)
    else:
        low, high = (max(1, math.ceil(value * m - 1e-9)) for value in k_grid.values)
    if low > m:
        return None
    return low, min(high, m)
