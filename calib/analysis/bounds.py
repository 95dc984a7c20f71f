"""The published bounds beside the measurements: which eps, which k, which constant.

How a success predicate is turned into the eps of the theory (written into every table):

- point sets: the distortion tolerance is eps itself (both bound the relative change of squared
  pairwise distances, as in Dasgupta–Gupta);
- clustering: the cost tolerance tau (cost ratio <= 1 + tau) gives eps = tau / (2 + tau), the eps at
  which keeping every K-partition's cost within 1 +- eps guarantees the ratio for exact optima
  (:func:`calib.theory.cost_ratio_eps`); the bounds are those of :data:`calib.theory.CLUSTERING_BOUNDS`
  with n = K, and only the logarithmic ones (Makarychev et al.'s ln(K / eps) / eps²) give a law
  constant (C = 1 / eps² for their shape with constant 1);
- LPs, SDPs and QPs: no theorem ties an objective or feasibility tolerance to eps, so eps is a
  stated choice: ``--eps`` when given, else the predicate's primary tolerance tau (a convention:
  "the bound at eps = tau"). Predicates without a tolerance (``classify``) need ``--eps``.

Every rule of :data:`calib.theory.RULES` maps (n, eps) -> k. Its constant C_rule in k = C ln n is
read off the rule itself as (k(e^50) - k(e^20)) / 30, which is exact for rules linear in ln n up to
their rounding (error <= 1/30). The ratios reported are bound k / measured safe k per size and
C_rule / C_fitted per law: how far below the theory the measurements sit.

Every bound is taken at the table's own failure probability delta (the safe k targets success
1 - delta), so "bound / measured" compares like with like:

- ``achlioptas`` with beta = ln(1/delta) / ln n (his failure probability n^-beta equals delta):
  k = (4 + 2 beta) ln n / (eps^2/2 - eps^3/3) = (4 ln n + 2 ln(1/delta)) / (eps^2/2 - eps^3/3);
- ``dasgupta-gupta`` at delta: their proof bounds the failure of one pair by
  2 exp(-k (eps^2/2 - eps^3/3) / 2) and takes the union over the n(n-1)/2 pairs, so the k that makes
  the union at most delta is k = 2 ln(n (n - 1) / delta) / (eps^2/2 - eps^3/3) (their theorem states
  the special case delta = 1 - 1/n);
- ``chi2-union`` with its failure parameter set to delta (exact chi-square pair tail, union bound);
- ``frankl-maehara`` and ``ln-over-eps2`` state no failure probability: shown as published, with
  ``failure`` null.

References: S. Dasgupta and A. Gupta, Random Structures & Algorithms 22(1):60–65, 2003 (Theorem 2.1
and its proof); D. Achlioptas, J. Computer and System Sciences 66(4):671–687, 2003 (Theorem 1.1).
"""

from __future__ import annotations

from typing import Iterable, Optional

import numpy as np
from numpy.typing import ArrayLike

from calib import theory
from calib.verdicts.success import Predicate, primary_tau

_LOG_SPAN = (20.0, 50.0)

EPS_CONVENTION = ("point sets: eps is the distortion tolerance; LPs, SDPs, QPs: eps is --eps when given, else "
                  "the predicate's primary tolerance tau (a stated convention, not a theorem)")
EPS_FROM_DISTORTION = "the predicate's distortion tolerance (for point sets eps is the distortion tolerance)"
EPS_FROM_COST = ("tau / (2 + tau) for the cost tolerance tau: every K-partition's cost kept within 1 +- eps bounds "
                 "the cost ratio of exact optima by (1 + eps) / (1 - eps) = 1 + tau")
CLUSTERING_CONVENTION = "; clustering: eps = tau / (2 + tau) for the cost tolerance tau, n = the number of clusters K"
EPS_FROM_USER = "--eps given at analysis time (a stated choice; no theorem ties this tolerance to eps)"
EPS_FROM_TAU = ("the predicate's primary tolerance tau (convention: the bound at eps = tau; no theorem ties "
                "an LP/SDP/QP tolerance to eps; choose another with --eps)")


def theory_eps(predicate: Predicate, kind: str, eps: Optional[float] = None) -> tuple[Optional[float], str]:
    """(eps, how it was chosen) for rows of ``kind`` under ``predicate``; eps None with the reason.

    >>> theory_eps(Predicate("distortion", gap=None, distortion=0.2, classify=False), "points")[0]
    0.2
    >>> theory_eps(Predicate("bound", gap=0.05), "lp")[0]
    0.05
    >>> theory_eps(Predicate("bound", gap=0.05), "lp", eps=0.3)[0]
    0.3
    """
    if kind == "clustering":
        if predicate.cost is None:
            return None, "the predicate has no cost tolerance"
        chosen, source = float(theory.cost_ratio_eps(predicate.cost)), EPS_FROM_COST
    elif kind == "points":
        if predicate.distortion is None:
            return None, "the predicate has no distortion tolerance"
        chosen, source = predicate.distortion, EPS_FROM_DISTORTION
    elif eps is not None:
        chosen, source = eps, EPS_FROM_USER
    else:
        chosen, source = primary_tau(predicate), EPS_FROM_TAU
        if chosen is None:
            return None, "the predicate has no tolerance to map to eps: pass --eps"
    if not 0.0 < chosen < 1.0:
        return None, f"eps = {chosen:g} lies outside (0, 1), where the bounds hold"
    return float(chosen), source


def dasgupta_gupta_at(n: ArrayLike, eps: ArrayLike, failure: ArrayLike) -> np.ndarray:
    """Dasgupta–Gupta's union bound at total failure probability ``failure`` (module text):
    k = ceil(2 ln(n (n - 1) / failure) / (eps^2/2 - eps^3/3)).

    ``n`` (points, >= 2), ``eps`` (relative distortion in (0, 1)) and ``failure`` (a probability in
    (0, 1)) broadcast together; the result is an int64 array of k of their shape. Reference:
    S. Dasgupta and A. Gupta, "An elementary proof of a theorem of Johnson and Lindenstrauss",
    Random Structures & Algorithms 22(1):60–65, 2003 (per pair 2 exp(-k (eps^2/2 - eps^3/3) / 2),
    union over n (n - 1) / 2 pairs).

    >>> int(dasgupta_gupta_at(1000, 0.5, 0.1))  # ceil(2 ln(1000 * 999 / 0.1) / (1/8 - 1/24))
    387
    """
    n, eps, failure = (np.asarray(value, dtype=float) for value in (n, eps, failure))
    return np.ceil(2.0 * np.log(n * (n - 1.0) / failure) / (eps**2 / 2.0 - eps**3 / 3.0)).astype(np.int64)


def rule_names(kinds: Iterable[str]) -> list[str]:
    """The names of the bounds the tables of rows of ``kinds`` compare with, sorted.

    >>> rule_names(["lp"]) == sorted(theory.RULES), rule_names(["clustering"])
    (True, ['cemmp-clustering', 'mmr-clustering'])
    """
    return sorted({name for kind in kinds for name in theory.bounds_for(kind)})


def eps_convention(kinds: Iterable[str]) -> str:
    """:data:`EPS_CONVENTION`, with the clustering rule when ``kinds`` holds clustering."""
    return EPS_CONVENTION + (CLUSTERING_CONVENTION if "clustering" in kinds else "")


def rules_at(failure: Optional[float], kind: Optional[str] = None) -> dict[str, tuple]:
    """name -> ((n, eps) -> k at ``failure``, the failure probability it holds at or None), for the
    bounds of ``kind`` (:func:`calib.theory.bounds_for`)."""
    if failure is None:
        return {name: (bound.k, None) for name, bound in theory.bounds_for(kind).items()}
    rules = {}
    for name, bound in theory.bounds_for(kind).items():
        if name == "dasgupta-gupta":
            rules[name] = (lambda n, eps: dasgupta_gupta_at(n, eps, failure), failure)
        elif bound.parameters(2.0, failure):
            rules[name] = ((lambda bound: lambda n, eps: bound.k(n, eps, **bound.parameters(n, failure)))(bound), failure)
        else:
            rules[name] = (bound.k, None)
    return rules


def bound_k(n_points: int, eps: float, failure: Optional[float] = None, kind: Optional[str] = None) -> dict[str, dict]:
    """k of every published rule of ``kind`` for ``n_points`` points (clusters, for clustering) at
    ``eps`` and total failure ``failure`` (each rule's own default when None), with the failure
    probability it holds at (None: not stated).

    >>> bound_k(1001, 0.5)["dasgupta-gupta"]["k"]  # scikit-learn johnson_lindenstrauss_min_dim(1001, eps=0.5): 331 (it truncates 331.6)
    332
    >>> bound_k(1000, 0.5, 0.1)["achlioptas"]  # ceil((4 ln 1000 + 2 ln 10) / (1/8 - 1/24))
    {'k': 387, 'failure': 0.1}
    >>> bound_k(10, 0.1, 0.1, kind="clustering")["mmr-clustering"]  # ceil(ln(10 / 0.1) / 0.1^2)
    {'k': 461, 'failure': None}
    """
    n = np.asarray(float(n_points))
    return {name: {"k": int(rule(n, np.asarray(eps))), "failure": at}
            for name, (rule, at) in sorted(rules_at(failure, kind).items())}


def rule_constants(eps: float, failure: Optional[float] = None, kind: Optional[str] = None) -> dict[str, float]:
    """C_rule of every published rule of ``kind`` that grows as ln n, at ``eps`` and ``failure``
    (k ~= C_rule ln n); see the module text.

    >>> round(rule_constants(0.5)["dasgupta-gupta"], 1)  # 4 / (1/8 - 1/24) = 48
    48.0
    >>> {name: round(C, 1) for name, C in rule_constants(0.1, 0.1, "clustering").items()}  # 1 / 0.1^2; CEMMP is linear in K
    {'mmr-clustering': 100.0}
    """
    low, high = (np.asarray(np.exp(x)) for x in _LOG_SPAN)
    eps = np.asarray(eps)
    logarithmic = {name for name, bound in theory.bounds_for(kind).items() if bound.logarithmic}
    return {name: float(rule(high, eps) - rule(low, eps)) / (_LOG_SPAN[1] - _LOG_SPAN[0])
            for name, (rule, _) in sorted(rules_at(failure, kind).items()) if name in logarithmic}


def ratio(bound: float, measured: Optional[float]) -> Optional[float]:
    """bound / measured, None when nothing positive was measured."""
    if measured is None or not np.isfinite(measured) or measured <= 0:
        return None
    return float(bound) / float(measured)
