"""Dense Gaussian projector: T_ij ~ N(0, 1/k) i.i.d., so E[T^T T] = I.

For a fixed x, each entry of sqrt(k) T x / ||x|| is a standard normal and the k entries are
independent, so k * ||T x||^2 / ||x||^2 follows the chi-square law with k degrees of freedom (a fact
of the Gaussian distribution; the JL proof of Dasgupta & Gupta, "An elementary proof of a theorem
of Johnson and Lindenstrauss", Random Structures & Algorithms 22(1), 2003, starts from it).

T is kept transposed, as a C-ordered m x k array G = Tᵀ: dense input goes through BLAS either way,
and a CSR input X is multiplied as (Xᵀ G)ᵀ, which reads the rows of G in order, once each. A CSC
input is first turned into CSR (its rows are needed in order).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.projectors.base import ArrayLike, Projector


class GaussianProjector(Projector):
    """T = G / sqrt(k) with G a k x m matrix of independent standard normals. Cost O(k m n)."""

    name = "gaussian"

    def _draw(self, rng: np.random.Generator) -> None:
        self._T_transposed = rng.standard_normal((self.m, self.k)) / np.sqrt(self.k)

    def _apply(self, X: ArrayLike) -> ArrayLike:
        if sp.issparse(X):
            return np.asarray((X.tocsr().T @ self._T_transposed).T)
        return self._T_transposed.T @ X

    def matrix(self) -> np.ndarray:
        """The dense k x m matrix T itself (entries N(0, 1/k)), a copy."""
        return self._T_transposed.T.copy()
