"""Achlioptas' database-friendly projector: T_ij = sqrt(3/k) · {+1, 0, -1} w.p. 1/6, 2/3, 1/6.

Reference: D. Achlioptas, "Database-friendly random projections: Johnson–Lindenstrauss with binary
coins", Journal of Computer and System Sciences 66(4):671–687, 2003. Each entry is nonzero with
probability 1/3 and has variance 1/k, so E[TᵀT] = I. Two thirds of T are zeros, so T is stored
sparse; dense input is multiplied through BLAS a block of T at a time (:mod:`kernels`).
"""

from __future__ import annotations

import numpy as np

from calib.projectors.construct import bernoulli_signs
from calib.projectors.sparse_sign import SparseSignProjector

#: Probability that an Achlioptas entry is nonzero.
DENSITY = 1.0 / 3.0


class AchlioptasProjector(SparseSignProjector):
    """Entries ±sqrt(3/k) with probability 1/6 each, else 0."""

    name = "achlioptas"

    def _draw(self, rng: np.random.Generator) -> None:
        self._store(bernoulli_signs(self.k, self.m, DENSITY, np.sqrt(1.0 / (self.k * DENSITY)), rng))
