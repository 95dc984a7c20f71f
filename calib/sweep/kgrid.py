"""The k grid of a spec (``sweep.k``): which projected dimensions k each size is measured at.

Six modes (docs/spec.md, ``sweep.k``), for a size with projected dimension m (rows projected) and
JL point count n (:mod:`calib.theory`):

- ``absolute``: k = the values given, integers >= 1;
- ``fractions`` f in (0, 1]: k = max(1, ceil(f m));
- ``log-multiples`` C > 0: k = max(1, ceil(C ln n)) (:func:`log_multiple_k`);
- ``eps`` in (0, 1) with a published ``rule``: k = the rule's bound at n points
  (:func:`calib.theory.k_from_eps`);
- ``search`` (``low`` < ``high``, integers) and ``search-fractions`` (fractions of m): the range
  a sequential k search covers, on the lattice low, low + step, ... (:func:`search_range`).

A k above m is no reduction: :func:`k_values` drops it (a search caps its upper end at m) and
:func:`skipped_ks` names what was dropped. ``ceil(x - 1e-9)`` keeps a product like 0.1 x 80 at 8
in floating point. Costs: O(grid values) per size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

from calib.checks import is_integer, is_real
from calib.spec_problems import ProblemList


@dataclass(frozen=True)
class KGrid:
    """How k is chosen: absolute values, fractions of the projected dimension, multiples C of ln n
    (k = ceil(C ln n), n the family's JL point count), eps with a rule, or a search range ``values = (low, high)`` in k ("search") or in fractions of m ("search-fractions")."""

    mode: str  # "absolute" | "fractions" | "log-multiples" | "eps" | "search" | "search-fractions"
    values: tuple
    rule: Optional[str] = None
    step: int = 1  # a search's lattice of k: low, low + step, ... (the resolution of its answer)
    extend: bool = True  # a search whose high end fails goes on above it, up to m - 1 (False: stop at high)

    @property
    def is_search(self) -> bool:
        return self.mode.startswith("search")


def _number_list(values, path: str, errors: ProblemList, check, fix: str) -> tuple:
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


def parse_k(value, errors: ProblemList) -> KGrid:
    """``sweep.k`` read into a :class:`KGrid` (problems recorded in ``errors``; an empty grid then)."""
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


def _parse_search(value, errors: ProblemList) -> KGrid:
    """``{low, high}`` (integers 1 <= low < high) or ``{low_fraction, high_fraction}`` (0 < low < high <= 1),
    with an optional ``step`` (integer >= 1, default 1): the lattice low, low + step, ... of k tested."""
    path = "sweep.k.search"
    ends = set(value) - {"step", "extend"} if isinstance(value, dict) else None
    if not isinstance(value, dict) or ends not in ({"low", "high"}, {"low_fraction", "high_fraction"}):
        errors.add(path, f"cannot read {value!r}", _SEARCH_FIX)
        return KGrid("search", ())
    step = value.get("step", 1)
    if not is_integer(step) or step < 1:
        errors.add(f"{path}.step", f"invalid value {step!r}", "step is an integer >= 1 (1: every k)")
        step = 1
    extend = value.get("extend", True)
    if not isinstance(extend, bool):
        errors.add(f"{path}.extend", f"invalid value {extend!r}", "extend is true (go on above high up to m - 1) or false")
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
    return KGrid("search-fractions" if fractions else "search", (low, high), step=step, extend=extend is not False)


def check_grid(cells, k_grid: KGrid, errors: ProblemList, registry) -> None:
    """A problem for every size of ``cells`` (the spec's family cells) where the grid gives no k."""
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
