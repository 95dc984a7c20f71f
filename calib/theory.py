"""Published target-dimension bounds for Johnson–Lindenstrauss projections.

``n`` is the number of points whose pairwise geometry the projection must keep. For an LP whose
rows are projected, the points are the n columns of A and the right-hand side b, so n_points =
n_cols + 1 (the choice made throughout calib; see :func:`lp_points`). ``eps`` is the relative
distortion of squared distances, 0 < eps < 1: (1 - eps)·|u - v|² <= |Tu - Tv|² <= (1 + eps)·|u - v|².

Every bound is computable both ways and vectorised over numpy arrays (broadcasting ``n`` against
``eps`` or ``k``):

* ``<bound>(n, eps)`` — the smallest integer k the bound allows (rounded up);
* ``<bound>_eps(n, k)`` — the smallest eps the bound guarantees with k dimensions, NaN when no
  eps < 1 is guaranteed. It is found by bisection on the integer-valued k-function itself, so
  ``<bound>(n, <bound>_eps(n, k)) <= k`` holds exactly.

:data:`BOUNDS` lists them by name; :data:`RULES` maps a name to its (n, eps) -> k function with the
default parameters.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike

from calib.checks import is_integer, is_real
from calib.errors import InputError

#: Total failure probability used by :func:`chi2_union` when none is given (our default).
DEFAULT_FAILURE = 0.05
_BISECTION_STEPS = 100


def _cubic(eps):
    """eps²/2 - eps³/3, the exponent of the per-pair tail in the Dasgupta–Gupta proof."""
    return eps**2 / 2.0 - eps**3 / 3.0


def _pairs(n):
    return n * (n - 1.0) / 2.0


def dasgupta_gupta(n: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Dasgupta–Gupta: k >= 4 ln n / (eps²/2 - eps³/3), rounded up.

    With that k a Gaussian projection keeps all pairs within 1 ± eps with probability at least 1/n.
    Reference: S. Dasgupta and A. Gupta, "An elementary proof of a theorem of Johnson and
    Lindenstrauss", Random Structures & Algorithms 22(1):60–65, 2003 (Theorem 2.1).
    scikit-learn's ``johnson_lindenstrauss_min_dim`` uses the same formula but truncates with
    ``int()``; we round up, so we can be one larger.

    >>> int(dasgupta_gupta(1000, 0.1))
    5921
    >>> int(dasgupta_gupta(100, 0.5))
    222
    >>> dasgupta_gupta(np.array([10, 1000]), 0.25).tolist()
    [354, 1062]
    """
    return achlioptas(n, eps, beta=0.0)


def dasgupta_gupta_eps(n: ArrayLike, k: ArrayLike) -> np.ndarray:
    """Smallest eps with ``dasgupta_gupta(n, eps) <= k`` (NaN if none below 1).

    >>> round(float(dasgupta_gupta_eps(1000, 5921)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: dasgupta_gupta(n, eps) <= k, n, k)


def achlioptas(n: ArrayLike, eps: ArrayLike, beta: float = 1.0) -> np.ndarray:
    """Achlioptas: k >= (4 + 2 beta) ln n / (eps²/2 - eps³/3), rounded up.

    With that k, Gaussian, ±1 and sqrt(3)·{+1, 0, -1} projections keep all pairs within 1 ± eps
    with probability at least 1 - n^(-beta). beta = 0 gives Dasgupta–Gupta's constant.
    Reference: D. Achlioptas, "Database-friendly random projections: Johnson–Lindenstrauss with
    binary coins", J. Computer and System Sciences 66(4):671–687, 2003 (Theorem 1.1).

    >>> int(achlioptas(1000, 0.1))
    8882
    >>> int(achlioptas(1000, 0.1, beta=2.0))
    11842
    """
    n, eps = np.asarray(n, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil((4.0 + 2.0 * beta) * np.log(n) / _cubic(eps)).astype(np.int64)


def achlioptas_eps(n: ArrayLike, k: ArrayLike, beta: float = 1.0) -> np.ndarray:
    """Smallest eps with ``achlioptas(n, eps, beta) <= k`` (NaN if none below 1).

    >>> round(float(achlioptas_eps(1000, 8882)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: achlioptas(n, eps, beta) <= k, n, k)


def beta_for_failure(n: ArrayLike, failure: ArrayLike) -> np.ndarray:
    """Achlioptas' beta that makes his failure probability n^(-beta) equal ``failure``.

    >>> round(float(beta_for_failure(1000, 0.001)), 12)
    1.0
    """
    return np.log(1.0 / np.asarray(failure, dtype=float)) / np.log(np.asarray(n, dtype=float))


def frankl_maehara(n: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Frankl–Maehara: k = ceil(9 ln n / (eps² - 2 eps³/3)) + 1.

    Reference: P. Frankl and H. Maehara, "The Johnson–Lindenstrauss lemma and the sphericity of
    some graphs", J. Combinatorial Theory B 44(3):355–362, 1988 (as restated in the introduction
    of Dasgupta & Gupta 2003).

    >>> int(frankl_maehara(1000, 0.1))
    6663
    """
    n, eps = np.asarray(n, dtype=float), np.asarray(eps, dtype=float)
    return (np.ceil(9.0 * np.log(n) / (eps**2 - 2.0 * eps**3 / 3.0)) + 1).astype(np.int64)


def frankl_maehara_eps(n: ArrayLike, k: ArrayLike) -> np.ndarray:
    """Smallest eps with ``frankl_maehara(n, eps) <= k`` (NaN if none below 1).

    >>> round(float(frankl_maehara_eps(1000, 6663)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: frankl_maehara(n, eps) <= k, n, k)


def pair_failure(k: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Probability that one pair leaves 1 ± eps under a Gaussian T with N(0, 1/k) entries.

    k·|Tx|²/|x|² is the sum of k squared standard normals, so it follows chi-square with k degrees
    of freedom (a fact of the Gaussian distribution; Dasgupta & Gupta 2003 start from it); this is
    P(chi2_k < k(1 - eps)) + P(chi2_k > k(1 + eps)), computed exactly.

    >>> round(float(pair_failure(100, 0.2)), 6)
    0.154742
    """
    from scipy.special import chdtr, chdtrc  # the chi-square cdf and sf, without scipy.stats' import time

    k, eps = np.asarray(k, dtype=float), np.asarray(eps, dtype=float)
    return chdtr(k, k * (1.0 - eps)) + chdtrc(k, k * (1.0 + eps))


def chi2_union(n: ArrayLike, eps: ArrayLike, failure: ArrayLike = DEFAULT_FAILURE) -> np.ndarray:
    """Gaussian bound aware of the failure probability: the smallest k with
    n(n-1)/2 · pair_failure(k, eps) <= failure.

    Each pair's tail is the exact chi-square tail (:func:`pair_failure`) instead of the Chernoff
    estimate of the published proofs, and the union bound runs over the n(n-1)/2 pairs, as in
    Dasgupta & Gupta 2003 (Theorem 2.1's proof). The search assumes pair_failure decreases in k.

    >>> int(chi2_union(1000, 0.1))
    5806
    >>> chi2_union(1000, 0.1, failure=np.array([0.5, 0.01])).tolist()
    [4878, 6460]
    """
    n, eps, failure = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (n, eps, failure)))
    budget = failure / _pairs(n)
    # Dasgupta–Gupta's Chernoff step gives pair_failure <= 2 exp(-k·(eps²/2 - eps³/3)/2): a k that
    # surely passes, to start the integer bisection from.
    high = np.ceil(2.0 * np.log(2.0 / budget) / _cubic(eps)).astype(np.int64) + 1
    low = np.zeros_like(high)  # invariant: low fails (k = 0 is not a projection), high passes
    while np.any(high - low > 1):
        mid = (low + high) // 2
        passes = pair_failure(np.maximum(mid, 1), eps) <= budget
        high, low = np.where(passes, mid, high), np.where(passes, low, mid)
    return high[()] if high.ndim == 0 else high


def chi2_union_eps(n: ArrayLike, k: ArrayLike, failure: ArrayLike = DEFAULT_FAILURE) -> np.ndarray:
    """Smallest eps with n(n-1)/2 · pair_failure(k, eps) <= failure (NaN if none below 1).

    >>> round(float(chi2_union_eps(1000, 5806)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: _pairs(np.asarray(n, float)) * pair_failure(k, eps) <= failure,
                         n, k, failure)


def ln_over_eps2(n: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Common-practice rule of thumb k = ln(n) / eps², rounded up (no published constant).

    >>> int(ln_over_eps2(1000, 0.1))
    691
    """
    n, eps = np.asarray(n, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil(np.log(n) / eps**2).astype(np.int64)


def ln_over_eps2_eps(n: ArrayLike, k: ArrayLike) -> np.ndarray:
    """Smallest eps with ``ln_over_eps2(n, eps) <= k``, about sqrt(ln n / k) (NaN if >= 1).

    >>> round(float(ln_over_eps2_eps(1000, 691)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: ln_over_eps2(n, eps) <= k, n, k)


# --- clustering: the cost of every K-partition kept within 1 +- eps --------------------------------
#
# For k-means the count that matters is the number of clusters K, not the number of points: both
# results below keep the k-means cost of *every* partition into K clusters within 1 +- eps. Neither
# states its constant (both are O(.) statements), so each is the shape with constant 1, and a
# table's law k = a + C ln K fits the constant the measurements need.


def cost_ratio_eps(tau: ArrayLike) -> np.ndarray:
    """The eps that guarantees a cost ratio of at most 1 + tau: eps = tau / (2 + tau).

    If the projection keeps every K-partition's cost within 1 +- eps, the partition P' best on the
    projected points and the partition P best on the original points satisfy
    cost(P') <= cost'(P') / (1 - eps) <= cost'(P) / (1 - eps) <= cost(P) (1 + eps) / (1 - eps),
    with cost' the cost on the projected points; (1 + eps) / (1 - eps) = 1 + tau at eps = tau / (2 + tau).
    A statement about exact optima: Lloyd's local optima are not covered.

    >>> float(cost_ratio_eps(0.1)) == 0.1 / 2.1, float(cost_ratio_eps(2.0))
    (True, 0.5)
    """
    tau = np.asarray(tau, dtype=float)
    return tau / (2.0 + tau)


def mmr_clustering(clusters: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Makarychev–Makarychev–Razenshteyn: k = ln(K / eps) / eps², rounded up (the shape; constant unstated).

    A random projection to O(log(K/eps)/eps²) dimensions keeps the k-means cost of every partition
    into K clusters within 1 +- eps, whatever the number of points; the paper states the order, not
    the constant, so this is the shape with constant 1. Reference: K. Makarychev, Y. Makarychev and
    I. Razenshteyn, "Performance of Johnson–Lindenstrauss transform for k-means and k-medians
    clustering", STOC 2019 (abstract and Theorem 1.3; arXiv:1811.03195).

    >>> int(mmr_clustering(10, 0.1))  # ceil(ln(100) / 0.01) = ceil(460.517...)
    461
    >>> mmr_clustering(np.array([2, 100]), 0.5).tolist()  # ceil(4 ln 4), ceil(4 ln 200)
    [6, 22]
    """
    clusters, eps = np.asarray(clusters, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil(np.log(clusters / eps) / eps**2).astype(np.int64)


def mmr_clustering_eps(clusters: ArrayLike, k: ArrayLike) -> np.ndarray:
    """Smallest eps with ``mmr_clustering(K, eps) <= k`` (NaN if none below 1).

    >>> round(float(mmr_clustering_eps(10, 461)), 4)
    0.1
    """
    return _smallest_eps(lambda eps: mmr_clustering(clusters, eps) <= k, clusters, k)


def cemmp_clustering(clusters: ArrayLike, eps: ArrayLike) -> np.ndarray:
    """Cohen–Elder–Musco–Musco–Persu: k = K / eps², rounded up (the shape; constant unstated).

    A Johnson–Lindenstrauss projection to O(K/eps²) dimensions is a projection-cost-preserving
    sketch: the k-means cost of every K-partition is kept within 1 +- eps, up to one additive
    constant shared by all partitions, which leaves the argument of :func:`cost_ratio_eps` intact.
    The order is stated, not the constant: the shape with constant 1. Reference: M. B. Cohen,
    S. Elder, C. Musco, C. Musco and M. Persu, "Dimensionality reduction for k-means clustering and
    low rank approximation", STOC 2015 (abstract; the random-projection theorem of its Section 6,
    from memory).

    >>> int(cemmp_clustering(10, 0.5)), int(cemmp_clustering(10, 0.1))  # 10 / 0.25, ceil(10 / 0.01)
    (40, 1000)
    """
    clusters, eps = np.asarray(clusters, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil(clusters / eps**2 - 1e-9).astype(np.int64)


def cemmp_clustering_eps(clusters: ArrayLike, k: ArrayLike) -> np.ndarray:
    """Smallest eps with ``cemmp_clustering(K, eps) <= k`` (NaN if none below 1).

    >>> round(float(cemmp_clustering_eps(10, 40)), 4)
    0.5
    """
    return _smallest_eps(lambda eps: cemmp_clustering(clusters, eps) <= k, clusters, k)


def _smallest_eps(passes: Callable[[np.ndarray], np.ndarray], *arguments) -> np.ndarray:
    """Smallest eps in (0, 1) where ``passes(eps)`` turns true (it must be monotone in eps), over
    the broadcast shape of ``arguments``.

    Bisection to adjacent floats; NaN where even eps -> 1 does not pass.
    """
    shape = np.broadcast_shapes(*(np.shape(argument) for argument in arguments))
    low, high = np.zeros(shape), np.full(shape, np.nextafter(1.0, 0.0))
    feasible = np.broadcast_to(passes(high), shape)
    for _ in range(_BISECTION_STEPS):
        mid = (low + high) / 2.0
        ok = np.broadcast_to(passes(mid), shape)
        high, low = np.where(ok, mid, high), np.where(ok, low, mid)
    eps = np.where(feasible, high, np.nan)
    return eps[()] if eps.ndim == 0 else eps


def _no_parameters(n, failure) -> dict:
    return {}


@dataclass(frozen=True)
class Bound:
    """A published bound: ``k(n, eps, **p)`` and its inverse ``eps(n, k, **p)``.

    ``parameters(n, failure)`` gives the keyword arguments that make the bound hold with total
    failure probability ``failure`` (empty when the bound has no such knob), and
    ``failure_bound(n, failure)`` the failure probability it then guarantees (NaN if not stated).
    """

    name: str
    k: Callable
    eps: Callable
    reference: str
    parameters: Callable[..., dict] = _no_parameters
    failure_bound: Callable[..., float] = lambda n, failure: float("nan")
    #: k grows as C ln n at fixed eps, so the constant of a law k = a + C ln n compares with it
    logarithmic: bool = True


#: name -> bound, in the order a table shows them.
BOUNDS: dict[str, Bound] = {bound.name: bound for bound in (
    Bound("dasgupta-gupta", dasgupta_gupta, dasgupta_gupta_eps,
          "Dasgupta & Gupta, Random Struct. Alg. 22(1), 2003",
          failure_bound=lambda n, failure: 1.0 - 1.0 / n),
    Bound("achlioptas", achlioptas, achlioptas_eps,
          "Achlioptas, J. Comput. Syst. Sci. 66(4), 2003",
          parameters=lambda n, failure: {"beta": float(beta_for_failure(n, failure))},
          failure_bound=lambda n, failure: failure),
    Bound("frankl-maehara", frankl_maehara, frankl_maehara_eps,
          "Frankl & Maehara, J. Combin. Theory B 44(3), 1988"),
    Bound("chi2-union", chi2_union, chi2_union_eps,
          "exact chi-square pair tail + union bound",
          parameters=lambda n, failure: {"failure": failure},
          failure_bound=lambda n, failure: failure),
    Bound("ln-over-eps2", ln_over_eps2, ln_over_eps2_eps,
          "common practice"),
)}

#: rule name -> function (n, eps) -> k, with each bound's default parameters.
RULES: dict[str, Callable] = {name: bound.k for name, bound in BOUNDS.items()}

#: the clustering bounds: n is the number of clusters K, eps the two-sided error on every K-partition's cost
CLUSTERING_BOUNDS: dict[str, Bound] = {bound.name: bound for bound in (
    Bound("mmr-clustering", mmr_clustering, mmr_clustering_eps,
          "Makarychev, Makarychev & Razenshteyn, STOC 2019 (constant unstated: shape with C = 1)"),
    Bound("cemmp-clustering", cemmp_clustering, cemmp_clustering_eps,
          "Cohen, Elder, Musco, Musco & Persu, STOC 2015 (constant unstated: shape with C = 1)", logarithmic=False),
)}

#: problem kind -> the bounds its tables compare with (the JL bounds of :data:`BOUNDS` otherwise)
KIND_BOUNDS: dict[str, dict[str, Bound]] = {"clustering": CLUSTERING_BOUNDS}


def bounds_for(kind: str | None) -> dict[str, Bound]:
    """The bounds of ``kind`` (:data:`KIND_BOUNDS`), the JL bounds for every other kind.

    >>> sorted(bounds_for("clustering")), "dasgupta-gupta" in bounds_for("lp")
    (['cemmp-clustering', 'mmr-clustering'], True)
    """
    return KIND_BOUNDS.get(kind, BOUNDS)


def check_rule(rule: str) -> Bound:
    """The bound named ``rule``, or :class:`InputError` listing the names."""
    if rule not in BOUNDS:
        raise InputError("k rule", f"unknown rule {rule!r}", f"choose one of {', '.join(sorted(BOUNDS))}")
    return BOUNDS[rule]


#: largest k the bounds take: integers above 2**53 are not exact in floating point
MAX_K = 2**53


def check_points(n: object, where: str = "n") -> int:
    """``n`` as an int if it counts at least 2 points, else :class:`InputError` naming ``where``."""
    if not is_integer(n) or n < 2:
        raise InputError(where, f"needs at least 2 points, got {n!r}", "count the points the projection must keep")
    return int(n)


def check_eps(eps: object, where: str = "eps") -> float:
    """``eps`` as a float if it lies in (0, 1), else :class:`InputError` naming ``where``."""
    if not is_real(eps) or not 0.0 < float(eps) < 1.0:
        raise InputError(where, f"must lie in (0, 1), got {eps!r}", "pick a distortion such as 0.2")
    return float(eps)


def check_k(k: object, where: str = "k") -> int:
    """``k`` as an int if it is a positive integer up to :data:`MAX_K`, else :class:`InputError`."""
    if not is_integer(k) or not 1 <= k <= MAX_K:
        raise InputError(where, f"must be an integer in 1..2**53, got {k!r}", "use k >= 1")
    return int(k)


def check_failure(failure: object, where: str = "failure") -> float:
    """``failure`` as a float if it lies in (0, 1), else :class:`InputError` naming ``where``."""
    if not is_real(failure) or not 0.0 < float(failure) < 1.0:
        raise InputError(where, f"must lie in (0, 1), got {failure!r}", "use a probability such as 0.05")
    return float(failure)


def k_from_eps(rule: str, n: int, eps: float) -> int:
    """k for ``n`` points at distortion ``eps`` by the named rule (validated here).

    >>> k_from_eps("dasgupta-gupta", 1000, 0.1)
    5921
    """
    bound = check_rule(rule)
    return int(bound.k(check_points(n), check_eps(eps)))


def eps_from_k(rule: str, n: int, k: int) -> float:
    """Smallest eps the named rule guarantees for ``n`` points in ``k`` dimensions (NaN if none).

    >>> round(eps_from_k("ln-over-eps2", 1000, 691), 4)
    0.1
    """
    bound = check_rule(rule)
    return float(bound.eps(check_points(n), check_k(k)))


#: how each kind counts n (the points the JL theory counts) and the projected dimension m: the one
#: text ``calib families``, ``calib probe`` and the docs show (the functions below compute them)
COUNTING = {
    "lp": "n = the columns of the standard form's A plus b (cols + 1), the points a row projection T A, T b "
          "must keep; m = the rows of A (its equality constraints), reduced to k",
    "sdp": "n = d(d + 1)/2 + 1 for order d, the svec columns of [A | b] a constraint projection must keep; "
           "m = the number of linear constraints, reduced to k",
    "qp": "n = the rows of A plus c and the optimum (rows + 2), the vectors a variable projection x = T^T u "
          "must keep; m = the number of variables, reduced to k",
    "points": "n = the number of points; m = their dimension, reduced to k",
    "clustering": "n = the number of clusters K (the clustering bounds depend on K and eps, not on the number of "
                  "points); m = the dimension of the points, reduced to k",
    "milp": "n = the columns of the standard form's A (decisions and slacks) plus b (cols + 1), as for an LP; "
            "m = its rows, reduced to k (bounds and integrality are kept)",
}


def counting(kind: str) -> str:
    """How ``kind`` counts n and m (:data:`COUNTING`).

    >>> counting("points")
    'n = the number of points; m = their dimension, reduced to k'
    """
    return COUNTING[kind]


def lp_points(n_cols: int) -> int:
    """Points an LP row projection must keep: the n columns of A and b (n + 1)."""
    return int(n_cols) + 1
