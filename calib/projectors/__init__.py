"""Random projection families and their registry.

``make(name, k, m, seed, **options)`` is the public edge: it validates the parameters and the
family's options once and returns a drawn :class:`~calib.projectors.base.Projector` with
``.apply(X)`` and ``.matrix()``.

Families (one module each): ``gaussian``, ``achlioptas``, ``very-sparse`` (option ``density``),
``srht``, ``sparse-jl`` (option ``s``) and ``countsketch``. Kernels are apart from construction:
:mod:`~calib.projectors.hadamard` (fast Walsh–Hadamard transform), :mod:`~calib.projectors.kernels`
(sparse T @ X) and :mod:`~calib.projectors.construct` (drawing sparse sign matrices).
"""

from __future__ import annotations

from typing import Any, Sequence, Union

import numpy as np

from calib.checks import is_integer
from calib.errors import InputError
from calib.projectors.achlioptas import AchlioptasProjector
from calib.projectors.base import Projector
from calib.projectors.countsketch import CountSketchProjector
from calib.projectors.gaussian import GaussianProjector
from calib.projectors.sparse_jl import SparseJLProjector
from calib.projectors.srht import SRHTProjector
from calib.projectors.very_sparse import VerySparseProjector

SeedLike = Union[int, Sequence[int], np.random.Generator]

#: name -> projector class. Add a family by implementing ``_draw``, ``_apply`` and ``matrix`` (or
#: subclassing a family that has them) and listing it here.
REGISTRY: dict[str, type[Projector]] = {
    cls.name: cls
    for cls in (GaussianProjector, AchlioptasProjector, VerySparseProjector, SRHTProjector,
                SparseJLProjector, CountSketchProjector)
}


def names() -> list[str]:
    """Registered projector names, sorted."""
    return sorted(REGISTRY)


def check_name(name: str, where: str = "projector") -> str:
    """Return ``name`` if it is registered, else raise :class:`InputError` listing the choices."""
    if name not in REGISTRY:
        raise InputError(where, f"unknown projector {name!r}", f"choose one of {', '.join(names())}")
    return name


def make(name: str, k: int, m: int, seed: SeedLike, **options: Any) -> Projector:
    """Draw projector ``name`` of shape (k, m) from ``seed``.

    ``seed`` is an integer, a sequence of integers (entropy for ``numpy.random.default_rng``) or a
    Generator. ``k`` must satisfy 1 <= k; families that sample rows without replacement (SRHT)
    additionally need k <= their padded dimension. ``options`` are the family's own (``s`` for
    sparse-jl, ``density`` for very-sparse) and are validated here.

    >>> T = make("gaussian", 3, 5, seed=1)
    >>> T.apply(np.ones(5)).shape
    (3,)
    >>> make("sparse-jl", 16, 100, seed=1, s=4).matrix().astype(bool).sum(axis=0).max()
    np.int64(4)
    """
    check_name(name)
    if not is_integer(k) or k < 1:
        raise InputError("k", f"must be a positive integer, got {k!r}", "use k >= 1")
    if not is_integer(m) or m < 1:
        raise InputError("m", f"must be a positive integer, got {m!r}", "the projected dimension is at least 1")
    family = REGISTRY[name]
    options = family.check_options(int(k), int(m), **options)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    return family(int(k), int(m), rng, **options)
