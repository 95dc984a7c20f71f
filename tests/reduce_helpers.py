"""Helpers shared by the reduction tests: family instances and test-only projectors."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.families import get
from calib.projectors.base import Projector

SOLVER = {"time_limit_s": 30.0}


def instance(name: str, params: dict, index: int = 0):
    family = get(name)
    return family.make(family.resolve(params, name), index, np.random.default_rng([index, 20261201]))


class _ExplicitProjector(Projector):
    """Test projectors that hold their matrix T (dense ndarray or sparse) explicitly as ``_T``."""

    def _apply(self, X):
        if sp.issparse(self._T):
            return (self._T @ X).tocsr() if sp.issparse(X) else self._T @ X
        return np.asarray((X.T @ self._T.T).T) if sp.issparse(X) else self._T @ X

    def matrix(self):
        return self._T.toarray() if sp.issparse(self._T) else np.array(self._T)


class OrthogonalProjector(_ExplicitProjector):
    """T = the first k rows of the Q factor of an m x m Gaussian matrix (T T^T = I_k; square T orthogonal)."""

    name = "test-orthogonal"

    def _draw(self, rng):
        Q, _ = np.linalg.qr(rng.standard_normal((self.m, self.m)))
        self._T = Q[: self.k]


class PrefixProjector(_ExplicitProjector):
    """The first k rows of one fixed m x m Gaussian draw: projections nested in k (same draw for every k)."""

    name = "test-prefix"

    def _draw(self, rng):
        self._T = rng.standard_normal((self.m, self.m))[: self.k] / np.sqrt(self.k)


class SparseSignProjector(_ExplicitProjector):
    """A CountSketch-shaped T (one random +-1 per column, in a random row) that returns sparse output
    for sparse input, to exercise the handlers on the sparse path the sparse projector families take
    (Clarkson & Woodruff, "Low rank approximation and regression in input sparsity time", STOC 2013)."""

    name = "test-sparse-sign"
    keeps_sparse = True

    def _draw(self, rng):
        rows = rng.integers(0, self.k, self.m)
        signs = rng.choice([-1.0, 1.0], self.m)
        self._T = sp.csr_array((signs, (rows, np.arange(self.m))), shape=(self.k, self.m))
