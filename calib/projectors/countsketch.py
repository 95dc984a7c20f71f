"""CountSketch: each column of T holds one ±1 in a uniformly chosen row (sparse JL with s = 1).

T @ X adds each row of X, with a random sign, into one of k buckets: O(nnz(X)) for sparse X, and the
result never holds more than nnz(X) nonzeros.

Reference: M. Charikar, K. Chen and M. Farach-Colton, "Finding frequent items in data streams",
Theoretical Computer Science 312(1):3–15, 2004; as a subspace embedding, K. L. Clarkson and
D. P. Woodruff, "Low rank approximation and regression in input sparsity time", STOC 2013.
"""

from __future__ import annotations

from typing import Any

from calib.projectors.base import reject_unknown
from calib.projectors.sparse_jl import SparseJLProjector


class CountSketchProjector(SparseJLProjector):
    """Sparse JL with exactly one nonzero per column; takes no options."""

    name = "countsketch"

    @classmethod
    def check_options(cls, k: int, m: int, **options: Any) -> dict[str, Any]:
        """No options (one nonzero per column by definition): {} or :class:`InputError`."""
        reject_unknown(cls.name, options, allowed=())
        return {}

    @property
    def s(self) -> int:
        """Nonzeros per column of T: 1."""
        return 1
