"""The ``[solver]`` table of a spec: every solve's limits and options, validated, defaults filled in.

Keys (docs/spec.md, ``[solver]``): ``time_limit_s`` (seconds per solve, default 60, enforced by the
solver), ``trial_timeout_s`` (seconds per task, enforced from outside by killing the worker; default
2 time_limit_s + 60), ``highs`` (HiGHS options, each tried on a fresh HiGHS object, minus those calib
sets itself), ``scs`` (the SCS settings of :data:`SCS_SETTINGS`), ``methods`` and ``projected``
(the methods raced for the fair baseline and the method of a projected solve per problem kind,
:mod:`calib.solvers.methods`), ``projected_time_limit_s`` and ``projected_max_iters`` (caps of a
projected solve only).

:func:`parse_solver` records problems in a :class:`~calib.spec_problems.ProblemList`;
:func:`solver_settings` gives the settings a raw table puts in force, which is how the store
decides whether a changed spec would alter stored solves (:func:`calib.store.resume.growth_problem`).
Costs: one HiGHS object per ``highs`` option checked, else O(keys).
"""

from __future__ import annotations

from typing import Optional

from calib.checks import is_integer, is_real
from calib.errors import InputError
from calib.spec_problems import ProblemList


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


def _seconds(table: dict, key: str, default, errors: ProblemList) -> Optional[float]:
    value = table.get(key, default)
    if not is_real(value) or not (0 < value < 1e6):
        errors.add(f"solver.{key}", f"must be a positive number of seconds below 1e6, got {value!r}", f"e.g. {key} = 60")
        return None
    return float(value)


def parse_solver(value, errors: ProblemList) -> dict:
    """The ``[solver]`` table validated, defaults filled in (problems recorded in ``errors``)."""
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


def _parse_methods(value: dict, solver: dict, errors: ProblemList) -> None:
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


def _parse_scs(value, errors: ProblemList) -> dict:
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


def _parse_projected_caps(value: dict, solver: dict, errors: ProblemList) -> None:
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
    return parse_solver(raw_solver if raw_solver is not None else {}, ProblemList())


def _parse_highs(value, errors: ProblemList) -> dict:
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
