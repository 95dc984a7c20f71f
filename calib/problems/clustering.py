"""Clustering problems: n points in R^d to split into K groups, with an optional minimum size.

A :class:`ClusteringProblem` holds the points (rows of an (n, d) array), the number of clusters K,
the method that clusters them (``lloyd`` or ``sized``, :mod:`calib.solvers.kmeans`), the seed of
its starts and, for ``sized``, the minimum number of points each cluster must hold. A projection
acts on the coordinates (d -> k), as for a point set.

**The k-means cost** of a partition P = (C_1, ..., C_K) of the points is

    cost(P) = sum_h sum_{i in C_h} ||x_i - mu_h||^2,   mu_h = the mean of C_h,

the within-cluster sum of squares (an empty cluster adds nothing). :func:`kmeans_cost` computes it
from the labels in O(n d) flops: one pass for the K means, one for the squared deviations.

**Which points the JL bounds count**: the number of clusters K, not the number of points. The
bounds of :data:`calib.theory.CLUSTERING_BOUNDS` keep the k-means cost of *every* K-partition
within 1 +- eps with k = O(log(K / eps) / eps^2) dimensions, whatever n is (Makarychev, Makarychev
and Razenshteyn 2019, below), so :attr:`ClusteringProblem.jl_points` is K.

References: S. P. Lloyd, "Least squares quantization in PCM", IEEE Trans. Information Theory
28(2):129–137, 1982 (the cost and its alternating minimisation); K. Makarychev, Y. Makarychev and
I. Razenshteyn, "Performance of Johnson–Lindenstrauss transform for k-means and k-medians
clustering", STOC 2019.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from calib.errors import InputError
from calib.problems.points import PointRows

#: clustering methods (:mod:`calib.solvers.kmeans`): plain Lloyd, and Lloyd with a size-constrained assignment
METHODS = ("lloyd", "sized")


@dataclass
class ClusteringProblem(PointRows):
    """K-means clustering of n points in R^d by one method from seeded starts.

    Attributes
    ----------
    points : ndarray, shape (n, d)
    clusters : int
        K, the number of clusters (2 <= K <= n).
    method : str
        ``lloyd`` (k-means++ starts, Lloyd iterations) or ``sized`` (the same starts, each
        assignment a transportation LP with a minimum cluster size, :mod:`calib.solvers.kmeans`).
    seed : int
        Seed of the starts; the original and every projection of it are clustered from the same seed.
    min_size : int
        ``sized`` only: every cluster holds at least this many points (K * min_size <= n); 0 for ``lloyd``.
    restarts : int
        Independent starts; the partition of least cost (in the space clustered) is kept.
    max_iter : int
        Cap on the Lloyd iterations of one start.
    """

    points: np.ndarray
    clusters: int
    method: str = "lloyd"
    seed: int = 0
    min_size: int = 0
    restarts: int = 1
    max_iter: int = 300
    name: str = "clustering"

    #: how this kind counts n (the JL points) and m (the projected dimension), as ``calib families`` shows it
    COUNTING: ClassVar[str] = ("n = the number of clusters K (the clustering bounds depend on K and eps, not on the number of "
                               "points); m = the dimension of the points, reduced to k")

    def __post_init__(self) -> None:
        self.points = np.asarray(self.points, dtype=float)

    @staticmethod
    def jl_points_for(clusters: int) -> int:
        """What the clustering bounds count for K clusters: K itself (module docstring).

        >>> ClusteringProblem.jl_points_for(10)
        10
        """
        return int(clusters)

    @property
    def jl_points(self) -> int:
        """The n of a clustering problem's bounds: the number of clusters K, not of points (module docstring)."""
        return self.jl_points_for(self.clusters)

    def validate(self) -> "ClusteringProblem":
        """Check the shapes, the method and that the size constraint can be met."""
        n = self.points.shape[0] if self.points.ndim == 2 else 0
        if self.points.ndim != 2 or n < 2 or self.points.shape[1] < 1 or not np.isfinite(self.points).all():
            raise InputError(self.name, f"points of shape {self.points.shape} (finite, n >= 2 rows) expected",
                             "give an (n, d) array of finite numbers")
        if self.method not in METHODS:
            raise InputError(self.name, f"unknown method {self.method!r}", f"choose one of {', '.join(METHODS)}")
        if not 2 <= self.clusters <= n:
            raise InputError(self.name, f"{self.clusters} clusters for {n} points", "use 2 <= clusters <= points")
        if self.min_size < 0 or self.clusters * self.min_size > n:
            raise InputError(self.name, f"{self.clusters} clusters of at least {self.min_size} points exceed the {n} points",
                             "lower the minimum size")
        return self


def cluster_means(points: np.ndarray, labels: np.ndarray, clusters: int) -> tuple[np.ndarray, np.ndarray]:
    """(means of shape (K, d), sizes of shape (K,)) of the labelled points; an empty cluster's mean is 0.

    >>> means, sizes = cluster_means(np.array([[0.0], [2.0], [10.0]]), np.array([0, 0, 1]), 3)
    >>> means.ravel().tolist(), sizes.tolist()
    ([1.0, 10.0, 0.0], [2, 1, 0])
    """
    labels = np.asarray(labels, dtype=np.int64)
    sizes = np.bincount(labels, minlength=clusters)
    dim = points.shape[1]
    cells = (labels[:, None] * dim + np.arange(dim)[None, :]).ravel()  # entry (i, j) adds to sums[label_i, j]
    sums = np.bincount(cells, weights=points.ravel(), minlength=clusters * dim).reshape(clusters, dim)
    return sums / np.maximum(sizes, 1)[:, None], sizes


def kmeans_cost(points: np.ndarray, labels: np.ndarray, clusters: int) -> float:
    """The within-cluster sum of squares of the partition ``labels`` (module docstring).

    >>> kmeans_cost(np.array([[0.0, 0.0], [2.0, 0.0], [10.0, 1.0]]), np.array([0, 0, 1]), 2)
    2.0
    """
    labels = np.asarray(labels, dtype=np.int64)
    means, _ = cluster_means(points, labels, clusters)
    return float(np.sum((points - means[labels]) ** 2))
