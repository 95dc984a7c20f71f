"""Dense Gaussian projector: T_ij ~ N(0, 1/k) i.i.d., so E[T^T T] = I.

For a fixed x, k * ||T x||^2 / ||x||^2 follows the chi-square law with k degrees of freedom
(Dasgupta & Gupta, "An elementary proof of a theorem of Johnson and Lindenstrauss", Random
Structures & Algorithms 22(1), 2003).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.projectors.base import ArrayLike, Projector


class GaussianProjector(Projector):
    """T = G / sqrt(k) with G a k x m matrix of independent standard normals. Cost O(k m n)."""

    name = "gaussian"

    def _draw(self, rng: np.random.Generator) -> None:
        self._T = rng.standard_normal((self.k, self.m)) / np.sqrt(self.k)

    def _apply(self, X: ArrayLike) -> ArrayLike:
        if sp.issparse(X):
            # (X^T T^T)^T keeps the sparse operand on the left, where scipy multiplies efficiently.
            return np.asarray((X.T @ self._T.T).T)
        return self._T @ X

    def matrix(self) -> np.ndarray:
        return self._T.copy()
