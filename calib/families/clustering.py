"""Clustering families: points to split into K groups, by plain or size-constrained k-means.

The JL count n of these families is the number of clusters K, not the number of points: the
bounds for clustering (:data:`calib.theory.CLUSTERING_BOUNDS`) depend on K and eps alone. The
projected dimension is the ambient dimension d. Every instance draws the seed of its k-means++
starts from its own stream, so instances of one size differ in their starts (and, for the
mixture, in their points).

``cluster-mixture``: a Gaussian mixture of our own. Point i belongs to component i mod K (equal
sizes); the K centres are drawn from N(0, separation^2 I_d) and each point is its centre plus
N(0, I_d) noise. Two centres are then about separation * sqrt(2 d) apart, in units of the noise's
standard deviation per coordinate; a Gaussian T (k x d) keeps that distance but spreads the noise
of each point over k coordinates of variance about d / k, so the projected mixture is about as
separated as one drawn in dimension k: small k merges components.

``cluster-digits``: the 1,797 handwritten digits of 8 x 8 pixels (64 features, grey levels 0..16)
that scikit-learn ships as ``sklearn.datasets.load_digits`` (a copy of the test set of the UCI
"Optical Recognition of Handwritten Digits" data, E. Alpaydin and C. Kaynak, 1998), as they come.

Methods (parameter ``method``, :mod:`calib.solvers.kmeans`): ``lloyd`` (k-means++ starts, Lloyd
iterations) or ``sized`` (the same, each assignment the transportation LP of Bradley, Bennett and
Demiriz 2000 with every cluster holding at least floor(min_share * n / K) points).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from calib.families.base import Family, fraction, one_of, positive_int, register, require
from calib.problems.clustering import METHODS, ClusteringProblem

#: seeds of the starts are drawn below this bound
_SEED_BOUND = 2**31


def min_size(params: dict, n_points: int) -> int:
    """Points every cluster must hold: floor(min_share * n / K) for ``sized``, 0 for ``lloyd``.

    >>> min_size({"method": "sized", "min_share": 0.5, "clusters": 4}, 1000), min_size({"method": "lloyd", "clusters": 4}, 1000)
    (125, 0)
    """
    if params["method"] != "sized":
        return 0
    return int(np.floor(params["min_share"] * n_points / params["clusters"]))


def _problem(points: np.ndarray, params: dict, rng: np.random.Generator, name: str) -> ClusteringProblem:
    return ClusteringProblem(points, params["clusters"], params["method"], seed=int(rng.integers(_SEED_BOUND)),
                             min_size=min_size(params, points.shape[0]), restarts=params["restarts"],
                             max_iter=params["max_iter"], name=name).validate()


def gaussian_mixture(n_points: int, dim: int, clusters: int, separation: float, rng: np.random.Generator):
    """(points (n, d), labels (n,), centres (K, d)) of the mixture of the module docstring."""
    centres = separation * rng.standard_normal((clusters, dim))
    labels = np.arange(n_points) % clusters
    return centres[labels] + rng.standard_normal((n_points, dim)), labels, centres


def _build_mixture(params: dict, rng: np.random.Generator):
    n, d, K = params["points"], params["dim"], params["clusters"]
    points, labels, centres = gaussian_mixture(n, d, K, params["separation"], rng)
    return _problem(points, params, rng, f"cluster-mixture-{n}x{d}-K{K}"), {"labels": labels, "centres": centres}


@lru_cache(maxsize=1)
def digits() -> tuple[np.ndarray, np.ndarray]:
    """(points (1797, 64), digit labels (1797,)) of scikit-learn's bundled digits (module docstring)."""
    try:
        from sklearn.datasets import load_digits
    except ImportError:
        from calib.errors import InputError

        raise InputError("cluster-digits", "needs scikit-learn, which ships the data set",
                         "pip install scikit-learn (or calib[datasets])") from None
    data = load_digits()
    return np.asarray(data.data, dtype=float), np.asarray(data.target)


#: rows and features of the digits data (checked against the loaded data in the tests)
DIGITS_SHAPE = (1797, 64)


def _build_digits(params: dict, rng: np.random.Generator):
    points, labels = digits()
    return _problem(points.copy(), params, rng, f"cluster-digits-K{params['clusters']}"), {"labels": labels}


def _check_method(params: dict, n_points: int) -> None:
    one_of(params, "method", METHODS)
    positive_int(params, "restarts")
    positive_int(params, "max_iter")
    if params["method"] == "sized":
        require(params["min_share"] is not None, "min_share", "the sized method needs a minimum cluster size",
                "set min_share in (0, 1]: each cluster holds at least min_share * points / clusters points")
        fraction(params, "min_share")
    else:
        require(params["min_share"] is None, "min_share", "only the sized method takes a minimum cluster size",
                'remove min_share or set method = "sized"')
    positive_int(params, "clusters", 2)
    require(params["clusters"] <= n_points, "clusters", f"exceeds the {n_points} points", "ask for fewer clusters")


def _check_mixture(params: dict) -> None:
    positive_int(params, "points", 2)
    positive_int(params, "dim")
    fraction(params, "separation", 0.0, 1e6)
    _check_method(params, params["points"])


def _check_digits(params: dict) -> None:
    _check_method(params, DIGITS_SHAPE[0])


_METHOD_DEFAULTS = {"method": "lloyd", "min_share": None, "restarts": 1, "max_iter": 300}
_METHOD_DOC = {
    "clusters": "number of clusters K (the n of the clustering bounds), integer in [2, points]",
    "method": "'lloyd' (k-means++ starts, Lloyd iterations) or 'sized' (each assignment a transportation LP "
              "with a minimum cluster size, solved by HiGHS)",
    "min_share": "sized only: every cluster holds at least floor(min_share * points / clusters) points, in (0, 1]",
    "restarts": "independent k-means++ starts; the partition of least cost is kept, integer >= 1",
    "max_iter": "cap on the assignments of one start, integer >= 1",
}

register(Family(
    name="cluster-mixture", kind="clustering",
    description="Points of a Gaussian mixture in R^d (K equal components, unit noise) clustered into K groups by "
                "k-means, plain or with a minimum cluster size; the partition found on projected points is judged "
                "by its k-means cost on the original points.",
    size_keys=("points", "dim", "clusters"),
    defaults={"points": None, "dim": None, "clusters": None, "separation": 0.5, **_METHOD_DEFAULTS},
    param_doc={"points": "number of points, integer >= 2", "dim": "ambient dimension d (the projected dimension), integer >= 1",
               "separation": "standard deviation of the component centres per coordinate, in units of the noise, in (0, 1e6]",
               **_METHOD_DOC},
    build=_build_mixture, projected_dim=lambda p: p["dim"], n_points=lambda p: p["clusters"], check=_check_mixture,
    memory=lambda p: 8 * p["points"] * p["dim"],
))
register(Family(
    name="cluster-digits", kind="clustering",
    description="scikit-learn's bundled handwritten digits (1,797 images of 8 x 8 pixels, from the UCI optical "
                "digits data) clustered into K groups by k-means, plain or with a minimum cluster size.",
    size_keys=("clusters",),
    defaults={"clusters": None, **_METHOD_DEFAULTS},
    param_doc=dict(_METHOD_DOC),
    build=_build_digits, projected_dim=lambda p: DIGITS_SHAPE[1], n_points=lambda p: p["clusters"], check=_check_digits,
))
