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


class OrthogonalProjector(Projector):
    """T = the first k rows of the Q factor of an m x m Gaussian matrix (T T^T = I_k; square T orthogonal)."""

    name = "test-orthogonal"

    def _draw(self, rng):
        Q, _ = np.linalg.qr(rng.standard_normal((self.m, self.m)))
        self._T = Q[: self.k]

    def _apply(self, X):
        return np.asarray((X.T @ self._T.T).T) if sp.issparse(X) else self._T @ X


class PrefixProjector(Projector):
    """The first k rows of one fixed m x m Gaussian draw: projections nested in k (same draw for every k)."""

    name = "test-prefix"

    def _draw(self, rng):
        self._T = rng.standard_normal((self.m, self.m))[: self.k] / np.sqrt(self.k)

    def _apply(self, X):
        return np.asarray((X.T @ self._T.T).T) if sp.issparse(X) else self._T @ X
