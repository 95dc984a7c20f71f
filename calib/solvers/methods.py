"""Solve methods per problem kind, and the fair baseline of an original problem.

A *method* is a named way to solve a problem of one kind:

===== ====================================================================================
kind  methods (default order)
===== ====================================================================================
lp    ``simplex`` (HiGHS dual simplex), ``ipm`` (HiGHS interior point; crossover only when a
      basis is needed, see :func:`calib.solvers.highs.method_options`)
qp    ``highs`` (HiGHS's QP solver; not applicable with a ball ||B x|| <= r), ``scs``
sdp   ``scs``
milp  ``highs`` (HiGHS branch and cut, :mod:`calib.solvers.milp`)
===== ====================================================================================

**The fair baseline** (:func:`race`). The original problem of an instance is solved once with
each configured method (the spec's ``[solver] methods``, default the order above). Every result is
recorded. The *reference* result, whose optimum and point the metrics compare against, is the
first method in the configured order that reaches a verdict (feasible or infeasible certified); it
does not depend on timing, so the metrics of a campaign are reproducible. The *baseline* is the
fastest method that reaches the reference's verdict: the time a reduction must beat, since a user
who does not reduce would solve the original with the best method at hand. Cost: one solve of the
original per configured method, once per instance.

**The projected solve** uses the method the spec names (``[solver] projected``), or ``auto``: for
an LP, ``ipm`` when the projected constraint matrix is dense and large (at least
:data:`DENSE_IPM_NONZEROS` nonzeros filling at least :data:`DENSE_IPM_FILL` of it: a Gaussian or
SRHT sketch of a long LP, where simplex pivots on dense columns are slow), ``simplex`` otherwise;
for a QP or an SDP, the first applicable default method. The rule looks at the data only, never at
timings, so a trial reproduces its numbers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Optional

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.solvers.result import SolveResult

#: kind -> methods in the default order
DEFAULT_METHODS = {"lp": ("simplex", "ipm"), "qp": ("highs", "scs"), "sdp": ("scs",), "milp": ("highs",)}
#: an LP whose projected matrix has at least this many nonzeros ...
DENSE_IPM_NONZEROS = 200_000
#: ... filling at least this share of its entries is solved by interior point under ``auto``
DENSE_IPM_FILL = 0.25


def _nonzeros(A) -> int:
    return int(A.nnz) if sp.issparse(A) else int(np.count_nonzero(A))


def dense_and_large(A) -> bool:
    """At least :data:`DENSE_IPM_NONZEROS` nonzeros filling at least :data:`DENSE_IPM_FILL` of A.

    >>> dense_and_large(np.ones((400, 1000))), dense_and_large(sp.identity(1000, format="csr"))
    (True, False)
    """
    m, n = A.shape
    nonzeros = _nonzeros(A)
    return nonzeros >= DENSE_IPM_NONZEROS and nonzeros >= DENSE_IPM_FILL * m * n


def auto_lp_method(A) -> str:
    """The ``auto`` method of an LP with constraint matrix A: ``ipm`` when :func:`dense_and_large`, else ``simplex``."""
    return "ipm" if dense_and_large(A) else "simplex"


def configured(kind: str, solver: dict) -> tuple[str, ...]:
    """The methods the spec's solver table configures for ``kind`` (its default order when unset)."""
    return tuple((solver.get("methods") or {}).get(kind) or DEFAULT_METHODS.get(kind, ()))


def check_methods(value, where: str) -> dict:
    """A validated ``methods`` table: kind -> non-empty list of known methods, no repeats.

    >>> check_methods({"lp": ["ipm", "simplex"]}, "solver.methods")
    {'lp': ('ipm', 'simplex')}
    """
    if not isinstance(value, dict):
        raise InputError(where, f"must be a table of kind = [methods], got {value!r}", 'e.g. methods = {lp = ["simplex", "ipm"]}')
    out = {}
    for kind, names in value.items():
        if kind not in DEFAULT_METHODS:
            raise InputError(f"{where}.{kind}", "is not a solved kind", f"use one of {', '.join(DEFAULT_METHODS)}")
        if not isinstance(names, list) or not names or len(set(map(str, names))) != len(names) \
                or any(name not in DEFAULT_METHODS[kind] for name in names):
            raise InputError(f"{where}.{kind}", f"must be a non-empty list of distinct methods, got {names!r}",
                             f"choose among {', '.join(DEFAULT_METHODS[kind])}")
        out[kind] = tuple(names)
    return out


def check_projected(value, where: str) -> dict:
    """A validated ``projected`` table: kind -> a method of that kind or ``auto``."""
    if not isinstance(value, dict):
        raise InputError(where, f"must be a table of kind = method, got {value!r}", 'e.g. projected = {lp = "ipm"}')
    for kind, name in value.items():
        choices = DEFAULT_METHODS.get(kind)
        if choices is None:
            raise InputError(f"{where}.{kind}", "is not a solved kind", f"use one of {', '.join(DEFAULT_METHODS)}")
        if name != "auto" and name not in choices:
            raise InputError(f"{where}.{kind}", f"unknown method {name!r}", f"choose auto or one of {', '.join(choices)}")
    return dict(value)


@dataclass
class Baseline:
    """Every configured method's solve of one original, the reference and the fastest (the baseline)."""

    results: dict
    reference: str
    fastest: str

    @property
    def result(self) -> SolveResult:
        """The reference result (the optimum and point the metrics compare against)."""
        return self.results[self.reference]

    @property
    def seconds(self) -> float:
        """Wall time of the baseline: the fastest method reaching the reference's verdict."""
        return self.results[self.fastest].seconds

    def summary(self) -> dict:
        """JSON-ready record of every method: status, the solver's code and message, value, time, iterations."""
        return {name: {"status": r.status, "code": r.solver_code, "message": r.solver_message, "solver": r.solver,
                       "objective": r.objective if np.isfinite(r.objective) else None, "seconds": r.seconds,
                       "iterations": r.iterations, "options": r.options}
                for name, r in self.results.items()}


def race(solve: Callable[[str], Optional[SolveResult]], methods: tuple[str, ...]) -> Baseline:
    """Solve with each method (``solve(name)`` returns None where the method does not apply).

    >>> fast = SolveResult("optimal", "a", 0, "", objective=1.0, seconds=2.0)
    >>> slow = SolveResult("optimal", "b", 0, "", objective=1.0, seconds=5.0)
    >>> b = race(lambda name: {"simplex": slow, "ipm": fast}[name], ("simplex", "ipm"))
    >>> b.reference, b.fastest, b.seconds
    ('simplex', 'ipm', 2.0)
    """
    results = {}
    for name in methods:
        result = solve(name)
        if result is not None:
            results[name] = result
    if not results:
        raise InputError("solver.methods", f"none of {', '.join(methods)} applies to this problem",
                         "add a method that does (e.g. scs for a QP with a ball)")
    with_verdict = [name for name, r in results.items() if r.feasible is not None]
    reference = with_verdict[0] if with_verdict else next(iter(results))
    verdict = results[reference].feasible
    same = [name for name in results if results[name].feasible == verdict] if verdict is not None else [reference]
    fastest = min(same, key=lambda name: results[name].seconds)
    return Baseline(results, reference, fastest)


def baseline_info(baseline: Optional[Baseline]) -> dict:
    """The baseline fields a trial needs: method, seconds, and the cold simplex solve (iterations, seconds)."""
    if baseline is None:
        return {}
    simplex = baseline.results.get("simplex")
    return {"method": baseline.fastest, "seconds": baseline.seconds,
            "simplex_iterations": None if simplex is None else simplex.iterations,
            "simplex_seconds": None if simplex is None else simplex.seconds}
