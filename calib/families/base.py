"""Family registry: named, documented, deterministic instance generators.

A family turns (parameters, random stream) into an :class:`Instance`. Generators are deterministic
per (parameters, seed): they draw only from the stream they are given. Each family states its
problem kind, its size keys, the dimension that projections act on, and the number of points the
JL theory counts for it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Optional

import numpy as np

from calib.checks import is_integer, is_real
from calib.errors import InputError


@dataclass
class Instance:
    """One generated or loaded problem.

    Attributes
    ----------
    family : str
    params : dict
        Full parameters (defaults filled in), including size keys.
    index : int
        Instance index within its (family, params) cell.
    kind : str
        "lp", "sdp", "qp" or "points".
    problem : object
        The problem container (e.g. :class:`calib.problems.lp.StandardLP`).
    info : dict
        Ground truth known by construction (planted point, certificate, expected feasibility...).
    """

    family: str
    params: dict
    index: int
    kind: str
    problem: Any
    info: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Family:
    """A registered generator.

    Attributes
    ----------
    name : str
    kind : str
    description : str
        What it models, one paragraph.
    size_keys : tuple of str
        Parameters that define the size (e.g. ("rows", "cols")).
    defaults : dict
        Every parameter with its default (size keys included).
    param_doc : dict
        Parameter -> "meaning, units, range".
    build : callable
        (params: dict, rng: Generator) -> problem, info
    projected_dim : callable
        params -> the dimension m that a projection shrinks (used for k fractions).
    n_points : callable
        params -> number of points the JL bounds count for this family.
    check : callable
        params -> None; raises InputError for out-of-range parameters.
    expand : callable or None
        params -> the list of params they stand for, when a size may be given by a container (a
        folder alone: one size per file); None: a size stands for itself.
    fixed : bool
        Every instance index of a size gives the same problem (read from a file): the size, not
        the instance, is the unit of a class claim across sizes.
    memory : callable or None
        params -> bytes the built problem's data takes at least, from the sizes alone (checked
        before anything is built); None when the family does not estimate it.
    """

    name: str
    kind: str
    description: str
    size_keys: tuple
    defaults: dict
    param_doc: dict
    build: Callable[[dict, np.random.Generator], tuple]
    projected_dim: Callable[[dict], int]
    n_points: Callable[[dict], int]
    check: Callable[[dict], None] = lambda params: None
    expand: Optional[Callable[[dict], list]] = None
    fixed: bool = False
    memory: Optional[Callable[[dict], int]] = None

    def sizes(self, params: dict, where: str) -> list[dict]:
        """The full parameter dicts ``params`` stands for: itself, or one per file of a folder alone."""
        given = self.expand(params) if self.expand is not None else [params]
        return [self.resolve(each, where) for each in given]

    def resolve(self, params: dict, where: str) -> dict:
        """Fill defaults, reject unknown keys, and validate; returns the full parameter dict."""
        unknown = sorted(set(params) - set(self.defaults))
        if unknown:
            raise InputError(where, f"unknown parameter {unknown[0]!r} for family {self.name!r}",
                             f"known parameters: {', '.join(sorted(self.defaults))}")
        full = {**self.defaults, **params}
        missing = [key for key in self.size_keys if full.get(key) is None]
        if missing:
            raise InputError(where, f"family {self.name!r} needs size key {missing[0]!r}", f"give {', '.join(self.size_keys)}")
        try:
            self.check(full)
        except InputError as error:
            raise InputError(_nested(where, error.where, self.defaults), error.problem, error.fix) from None
        return full

    def size_label(self, params: dict) -> str:
        """``key=value`` of the size keys, comma-separated (see :func:`size_label`)."""
        return size_label(self.size_keys, params)

    def make(self, params: dict, index: int, rng: np.random.Generator) -> Instance:
        """Instance number ``index`` of this family at full ``params``, drawn from ``rng`` (the
        instance's own stream, :meth:`calib.trial.InstanceRef.build`)."""
        problem, info = self.build(params, rng)
        return Instance(family=self.name, params=params, index=index, kind=self.kind, problem=problem, info=info)


def _nested(where: str, inner: str, keys) -> str:
    """The location of a check's error: ``where.key`` for a parameter, ``where: file`` for a file.

    >>> _nested("families[0].sizes[1]", "rows", {"rows": None})
    'families[0].sizes[1].rows'
    >>> _nested("families[0].sizes[0]", "data/x.mps", {"dir": None})
    'families[0].sizes[0]: data/x.mps'
    >>> _nested("x.mps", "x.mps", {})
    'x.mps'
    """
    if inner in keys:
        return f"{where}.{inner}"
    return where if inner == where else f"{where}: {inner}"


REGISTRY: dict[str, Family] = {}


def size_label(keys, params: dict) -> str:
    """The label of an instance size: ``key=value`` for each of ``keys``, comma-separated.

    >>> size_label(("rows", "cols"), {"rows": 20, "cols": 40, "density": 0.5})
    'rows=20,cols=40'
    """
    return ",".join(f"{key}={params[key]}" for key in keys)


def register(family: Family) -> Family:
    """Add ``family`` to :data:`REGISTRY` under its name (a name registered twice is a ``ValueError``)."""
    if family.name in REGISTRY:
        raise ValueError(f"family {family.name!r} registered twice")
    REGISTRY[family.name] = family
    return family


def get(name: str, where: str = "family") -> Family:
    """The registered family ``name``, else :class:`InputError` naming ``where`` and the known names."""
    if name not in REGISTRY:
        raise InputError(where, f"unknown family {name!r}", f"choose one of {', '.join(sorted(REGISTRY))} (see `calib families`)")
    return REGISTRY[name]


def require(condition: bool, where: str, problem: str, fix: str) -> None:
    """Raise :class:`InputError` unless ``condition`` holds (parameter checks in families)."""
    if not condition:
        raise InputError(where, problem, fix)


def positive_int(params: dict, key: str, minimum: int = 1) -> None:
    """``params[key]`` is an integer >= ``minimum``, else :class:`InputError`."""
    value = params[key]
    require(is_integer(value) and value >= minimum,
            key, f"must be an integer >= {minimum}, got {value!r}", f"set {key} to an integer >= {minimum}")


def fraction(params: dict, key: str, low: float = 0.0, high: float = 1.0, closed_low: bool = False,
             closed_high: bool = True) -> None:
    """``params[key]`` is a finite number in the interval from ``low`` to ``high`` (ends open or closed
    as asked), else :class:`InputError`."""
    value = params[key]
    ok = is_real(value) and np.isfinite(value)
    ok = ok and (low <= value if closed_low else low < value) and (value <= high if closed_high else value < high)
    bracket = ("[" if closed_low else "(") + f"{low}, {high}" + ("]" if closed_high else ")")
    require(ok, key, f"must lie in {bracket}, got {value!r}", f"pick {key} in that range")


def positive(params: dict, key: str, high: float = np.inf) -> None:
    """A finite real number in (0, high]."""
    value = params[key]
    ok = is_real(value) and np.isfinite(value) and 0 < value <= high
    require(ok, key, f"must be a finite number in (0, {high}], got {value!r}", f"set {key} to a positive number")


def one_of(params: dict, key: str, options: tuple) -> None:
    """``params[key]`` is one of ``options``, else :class:`InputError` listing them."""
    value = params[key]
    require(value in options, key, f"must be one of {', '.join(map(repr, options))}, got {value!r}", f"pick one of {', '.join(map(str, options))}")
