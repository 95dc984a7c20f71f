"""Point sets: n points in R^d whose coordinates a projection maps to R^k (d -> k).

The points are the rows of an array of shape (n, d); a projector T of shape (k, d) maps them to the
rows of (T P^T)^T, shape (n, k) (:mod:`calib.reduce.points`). :class:`PointRows` is what every
problem made of points offers a projection (:class:`PointSet` here, and the clustering problem of
:mod:`calib.problems.clustering`).

Which points the JL bounds count
--------------------------------
All n of them: this is the lemma's own setting (W. B. Johnson and J. Lindenstrauss, "Extensions of
Lipschitz mappings into a Hilbert space", Contemporary Mathematics 26:189–206, 1984): a projection
to k = O(log n / eps^2) dimensions keeps every pairwise distance within 1 +- eps
(:attr:`PointSet.jl_points`, :mod:`calib.theory` for the published constants).

Costs: :meth:`PointSet.validate` is O(n d log n) (the duplicate check sorts the rows).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from calib.errors import InputError
from calib.problems.arrays import check_finite


class PointRows:
    """What a problem made of n points in R^d (rows of ``self.points``, shape (n, d)) offers a projection."""

    points: np.ndarray

    @property
    def n_points(self) -> int:
        """Number of points n (rows of ``points``)."""
        return self.points.shape[0]

    @property
    def dim(self) -> int:
        """Ambient dimension d (the projected dimension)."""
        return self.points.shape[1]

    @property
    def columns(self) -> np.ndarray:
        """The points as columns, shape (d, n): what a projector T (k x d) multiplies."""
        return self.points.T


@dataclass
class PointSet(PointRows):
    """n distinct points in R^d; a projection acts on the coordinates (d -> k).

    Attributes
    ----------
    points : ndarray, shape (n, d)
        One point per row.
    name : str
    """

    points: np.ndarray
    name: str = "points"

    #: how this kind counts n (the JL points) and m (the projected dimension), as ``calib families`` shows it
    COUNTING: ClassVar[str] = "n = the number of points; m = their dimension, reduced to k"

    def __post_init__(self) -> None:
        self.points = np.asarray(self.points, dtype=float)

    @staticmethod
    def jl_points_for(n_points: int) -> int:
        """JL points of a projection of ``n_points`` points: the points themselves (module docstring).

        >>> PointSet.jl_points_for(1000)
        1000
        """
        return int(n_points)

    @property
    def jl_points(self) -> int:
        """Points a projection of the coordinates must keep: all n of them, the lemma's own setting."""
        return self.jl_points_for(self.n_points)

    def validate(self) -> "PointSet":
        """Check shape, finiteness and that the points are distinct (distortion ratios need d_ij > 0)."""
        if self.points.ndim != 2 or self.points.shape[0] < 2 or self.points.shape[1] < 1:
            raise InputError(self.name, f"points have shape {self.points.shape}", "give an (n, d) array with n >= 2 points")
        check_finite("points", self.name, self.points)
        if np.unique(self.points, axis=0).shape[0] != self.n_points:
            raise InputError(self.name, "two points coincide", "remove duplicate points (their distance ratio is undefined)")
        return self
