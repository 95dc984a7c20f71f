"""Sparse JL: exactly s nonzeros ±1/sqrt(s) per column, in s distinct uniformly chosen rows.

Every column of T has unit norm and the signs are independent, so E[TᵀT] = I. Applying T costs
O(s · nnz(X)) for sparse X and O(s · m · n) for dense X (:mod:`kernels`); a CSR input whose
k x n accumulator is no larger than itself is streamed once per nonzero of a column
(:func:`~calib.projectors.kernels.column_accumulate`). s = 1 is CountSketch (:mod:`countsketch`).

References: D. M. Kane and J. Nelson, "Sparser Johnson–Lindenstrauss transforms", Journal of the
ACM 61(1), 2014 (the construction with s distinct rows per column); J. Nelson and H. L. Nguyễn,
"OSNAP: faster numerical linear algebra algorithms via sparser subspace embeddings", FOCS 2013.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import scipy.sparse as sp

from calib.checks import is_integer
from calib.errors import InputError
from calib.projectors.base import ArrayLike, reject_unknown
from calib.projectors.construct import column_signs
from calib.projectors.kernels import accumulator_fits, column_accumulate
from calib.projectors.sparse_sign import SparseSignProjector

#: Nonzeros per column when the option ``s`` is not given (our default; capped at k).
DEFAULT_S = 8


class SparseJLProjector(SparseSignProjector):
    """s nonzeros per column (option ``s``, 1 <= s <= k, default min(8, k))."""

    name = "sparse-jl"

    @classmethod
    def check_options(cls, k: int, m: int, **options: Any) -> dict[str, Any]:
        """``s``, the nonzeros per column (an integer in [1, k], default min(DEFAULT_S, k)), or
        :class:`InputError`."""
        reject_unknown(cls.name, options, allowed=("s",))
        s = options.get("s", min(DEFAULT_S, k))
        if not is_integer(s) or not 1 <= s <= k:
            raise InputError("projector sparse-jl: s", f"must be an integer in [1, k={k}], got {s!r}",
                             "use a few nonzeros per column, e.g. s = 4")
        return {"s": int(s)}

    @property
    def s(self) -> int:
        """Nonzeros per column."""
        return int(self.options.get("s", min(DEFAULT_S, self.k)))

    def _draw(self, rng: np.random.Generator) -> None:
        self._store(column_signs(self.k, self.m, self.s, 1.0 / np.sqrt(self.s), rng))

    def _apply(self, X: ArrayLike) -> ArrayLike:
        if sp.issparse(X) and X.format == "csr" and accumulator_fits(self.k, X):
            T = self._matrix_in("csc")
            return column_accumulate(T.indices.reshape(self.m, self.s), T.data.reshape(self.m, self.s), self.k, X)
        return super()._apply(X)
