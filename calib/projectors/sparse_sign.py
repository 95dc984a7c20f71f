"""Projectors stored as a sparse matrix of signed constants (the shared part of four families).

Achlioptas, very sparse, sparse JL and CountSketch all keep T as a k x m sparse matrix whose
nonzeros are ±scale; they differ only in how the nonzeros are placed, which each family's
``_draw`` decides (see :mod:`construct`). The draw stores T in the format it produces (CSR for
i.i.d. entries, CSC for a fixed count per column); the other format is built on first need and
kept. Applying T is :func:`kernels.sparse_times`: sparse input gives sparse output in the same
format, dense gives dense, and no dense T is ever formed for sparse input.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.projectors.base import ArrayLike, Projector
from calib.projectors.kernels import sparse_times


class SparseSignProjector(Projector):
    """Base of the sparse families: ``_draw`` calls :meth:`_store` with T (CSR or CSC, k x m)."""

    keeps_sparse = True

    def _store(self, T: sp.sparray) -> None:
        self._formats = {T.format: T}
        self.nnz = int(T.nnz)

    def _matrix_in(self, fmt: str) -> sp.sparray:
        """T in ``fmt`` ("csr" or "csc"), converted once and kept."""
        if fmt not in self._formats:
            stored = next(iter(self._formats.values()))
            self._formats[fmt] = stored.asformat(fmt)
        return self._formats[fmt]

    def _apply(self, X: ArrayLike) -> ArrayLike:
        return sparse_times(self._matrix_in, X, (self.k, self.m), self.nnz)

    def matrix(self) -> np.ndarray:
        """The k x m matrix T made dense from its stored sparse form (for tests and small m)."""
        return next(iter(self._formats.values())).toarray()
