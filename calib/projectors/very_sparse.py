"""Very sparse random projections (Li, Hastie & Church 2006).

T_ij = sqrt(1/(k·density)) · {+1, 0, -1} with probabilities density/2, 1 - density, density/2, so
each entry has variance 1/k and E[TᵀT] = I. The default density 1/sqrt(m) is the paper's
recommendation.

Reference: P. Li, T. J. Hastie and K. W. Church, "Very sparse random projections", Proceedings of
the 12th ACM SIGKDD conference (KDD 2006), 287–296. Achlioptas (2003) is the case density = 1/3.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from calib.checks import is_real
from calib.errors import InputError
from calib.projectors.base import reject_unknown
from calib.projectors.construct import bernoulli_signs
from calib.projectors.sparse_sign import SparseSignProjector


def default_density(m: int) -> float:
    """Li–Hastie–Church's recommended density 1/sqrt(m).

    >>> default_density(10_000)
    0.01
    """
    return float(1.0 / np.sqrt(m))


class VerySparseProjector(SparseSignProjector):
    """Entries ±1/sqrt(k·density) with probability density/2 each, else 0. Option ``density``."""

    name = "very-sparse"

    @classmethod
    def check_options(cls, k: int, m: int, **options: Any) -> dict[str, Any]:
        """``density``, the expected share of nonzero entries (in (0, 1], default 1/sqrt(m); Li, Hastie
        & Church 2006), or :class:`InputError`."""
        reject_unknown(cls.name, options, allowed=("density",))
        density = options.get("density", default_density(m))
        if not is_real(density) or not 0.0 < float(density) <= 1.0:
            raise InputError("projector very-sparse: density", f"must lie in (0, 1], got {density!r}",
                             f"use a fraction of nonzeros such as {default_density(m):.3g} (1/sqrt(m))")
        return {"density": float(density)}

    def _draw(self, rng: np.random.Generator) -> None:
        density = self.options.get("density", default_density(self.m))
        self._store(bernoulli_signs(self.k, self.m, density, np.sqrt(1.0 / (self.k * density)), rng))
