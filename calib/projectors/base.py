"""The projector interface shared by every family.

A projector is a random linear map T: R^m -> R^k with E[T^T T] = I, drawn once from a random
stream. Construction (:meth:`Projector._draw`) is kept apart from the kernel that applies it
(:meth:`Projector._apply`); each family implements exactly those two hooks. Draw time and apply
time are recorded separately (seconds, wall clock) so the runner can log sketch cost apart from
solve cost.

Inputs to :meth:`Projector.apply` are a vector of shape (m,), a dense array of shape (m, n) or a
scipy.sparse matrix of shape (m, n); the projection acts along the rows (T @ X). Sparse inputs reach
``_apply`` as CSR or CSC arrays, in the caller's format and without a copy (other sparse formats
are converted to CSR).

Family options (such as the nonzeros per column ``s``) are checked once, at
:func:`calib.projectors.make`, by the family's :meth:`Projector.check_options`.
"""

from __future__ import annotations

import time
from abc import ABC, abstractmethod
from typing import Any, ClassVar, Union

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError

ArrayLike = Union[np.ndarray, sp.spmatrix, sp.sparray]


class Projector(ABC):
    """A drawn random projection T of shape (k, m).

    Parameters are validated by :func:`calib.projectors.make` (the public edge) and trusted here.

    Attributes
    ----------
    k, m : int
        Target and source dimensions.
    draw_seconds : float
        Wall time spent drawing T.
    apply_seconds : float
        Wall time accumulated by :meth:`apply` calls.
    """

    #: Registry name of the family.
    name: ClassVar[str] = ""
    #: True when :meth:`apply` returns a sparse matrix for sparse input.
    keeps_sparse: ClassVar[bool] = False

    @classmethod
    def check_options(cls, k: int, m: int, **options: Any) -> dict[str, Any]:
        """Validate this family's options for shape (k, m); return them with defaults filled in.

        The default accepts no options. Families with options override this and raise
        :class:`InputError` naming the option and the fix.
        """
        reject_unknown(cls.name, options, allowed=())
        return {}

    def __init__(self, k: int, m: int, rng: np.random.Generator, **options: Any):
        self.k = int(k)
        self.m = int(m)
        self.options = options
        self.apply_seconds = 0.0
        start = time.perf_counter()
        self._draw(rng)
        self.draw_seconds = time.perf_counter() - start

    @abstractmethod
    def _draw(self, rng: np.random.Generator) -> None:
        """Draw the random ingredients of T from ``rng`` and keep them on ``self``."""

    @abstractmethod
    def _apply(self, X: ArrayLike) -> ArrayLike:
        """Return T @ X for X of shape (m, n) (dense ndarray or scipy.sparse CSR/CSC)."""

    def apply(self, X: ArrayLike) -> ArrayLike:
        """T @ X along the rows of X; a 1-D input of shape (m,) gives shape (k,).

        Dense input gives a dense ndarray; sparse input gives sparse output for families that keep
        sparsity (:attr:`keeps_sparse`) and a dense ndarray otherwise.
        """
        one_dim = not sp.issparse(X) and np.ndim(X) == 1
        X = _as_operand(X)
        if X.shape[0] != self.m:
            raise ValueError(f"projector expects {self.m} rows, got shape {X.shape}")
        start = time.perf_counter()
        out = self._apply(X)
        self.apply_seconds += time.perf_counter() - start
        if one_dim:
            return np.asarray(out).ravel()
        return out

    @abstractmethod
    def matrix(self) -> np.ndarray:
        """The explicit dense k x m matrix, built from the drawn ingredients without the
        :meth:`_apply` kernel (for tests and small m only)."""

    def __repr__(self) -> str:
        return f"{type(self).__name__}(k={self.k}, m={self.m})"


def _as_operand(X: ArrayLike) -> ArrayLike:
    """Float (m, n) operand: sparse stays CSR/CSC (other formats become CSR), dense becomes 2-D."""
    if sp.issparse(X):
        X = X if X.format in ("csr", "csc") else X.tocsr()
        X = X.astype(float, copy=False)
        return sp.csc_array(X, copy=False) if X.format == "csc" else sp.csr_array(X, copy=False)
    X = np.asarray(X, dtype=float)
    return X[:, None] if X.ndim == 1 else X


def reject_unknown(family: str, options: dict[str, Any], allowed: tuple[str, ...]) -> None:
    """Raise :class:`InputError` if ``options`` holds a name outside ``allowed``."""
    unknown = sorted(set(options) - set(allowed))
    if unknown:
        accepted = ", ".join(allowed) if allowed else "none"
        raise InputError(f"projector {family}", f"unknown option {unknown[0]!r}", f"options accepted: {accepted}")
