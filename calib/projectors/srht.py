"""Subsampled randomized Hadamard transform: T = sqrt(m'/k) · R · H · D.

D is an m x m diagonal of independent random signs, the input is zero-padded to m' = the next
power of two, H is the normalised m' x m' Walsh–Hadamard matrix (Sylvester order) and R keeps k of
its m' rows, sampled uniformly without replacement, so E[TᵀT] = I. Neither H nor T is ever formed:
:class:`~calib.projectors.hadamard.HadamardPlan` applies H through BLAS, one small Hadamard block
per digit of the row index, and computes only the k sampled rows in its last step. The scale
sqrt(m'/k)/sqrt(m') = 1/sqrt(k) is folded into the signs.

Sparse input is densified a block of columns at a time (at most :data:`SPARSE_BLOCK_BYTES` of
dense workspace); the output is dense.

References: N. Ailon and B. Chazelle, "The fast Johnson–Lindenstrauss transform and approximate
nearest neighbors", SIAM J. Computing 39(1), 2009; J. A. Tropp, "Improved analysis of the
subsampled randomized Hadamard transform", Advances in Adaptive Data Analysis 3(1–2), 2011.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.linalg import hadamard

from calib.errors import InputError
from calib.projectors.base import ArrayLike, Projector, reject_unknown
from calib.projectors.construct import random_signs
from calib.projectors.hadamard import HadamardPlan, next_power_of_two

#: Dense workspace for one block of columns of a sparse input, in bytes.
SPARSE_BLOCK_BYTES = 1 << 23


class SRHTProjector(Projector):
    """sqrt(m'/k)·R·H·D with m' = next power of two >= m; needs k <= m'. Cost O(m' log m' · n)."""

    name = "srht"

    @classmethod
    def check_options(cls, k: int, m: int, **options: Any) -> dict[str, Any]:
        """No options; k must not exceed m' (the padded power of two), else :class:`InputError`."""
        reject_unknown(cls.name, options, allowed=())
        padded = next_power_of_two(m)
        if k > padded:
            raise InputError("k", f"srht samples k rows of the {padded} rows of the padded Hadamard "
                             f"matrix (m={m}), got k={k}", f"use k <= {padded}")
        return {}

    def _draw(self, rng: np.random.Generator) -> None:
        self._weights = random_signs(self.m, rng) / np.sqrt(self.k)
        self._plan = HadamardPlan(self._weights, rng.choice(next_power_of_two(self.m), self.k, replace=False))

    @property
    def rows(self) -> np.ndarray:
        """Sampled rows of H, in output order."""
        return self._plan.rows

    def _apply(self, X: ArrayLike) -> np.ndarray:
        if not sp.issparse(X):
            return self._plan.apply(X)
        X = X.tocsc()
        out = np.empty((self.k, X.shape[1]))
        width = max(1, SPARSE_BLOCK_BYTES // (8 * self._plan.size))
        for first in range(0, X.shape[1], width):
            last = min(X.shape[1], first + width)
            out[:, first:last] = self._plan.apply(X[:, first:last].toarray())
        return out

    def matrix(self) -> np.ndarray:
        """The k x m matrix sqrt(m'/k) R H D made dense (an explicit Hadamard matrix: small m only)."""
        return hadamard(self._plan.size)[self.rows, : self.m] * self._weights
