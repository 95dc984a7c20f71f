"""The projector interface shared by every family.

A projector is a random linear map T: R^m -> R^k with E[T^T T] = I, drawn once from a random
stream. Construction (:meth:`Projector._draw`) is kept apart from the kernel that applies it
(:meth:`Projector._apply`); each family implements exactly those two hooks. Draw time and apply
time are recorded separately (seconds, wall clock) so the runner can log sketch cost apart from
solve cost.

Inputs to :meth:`Projector.apply` are a vector of shape (m,), a dense array of shape (m, n) or a
scipy.sparse matrix of shape (m, n); the projection acts along the rows (T @ X).
"""

from __future__ import annotations

import time
from abc import ABC, abstractmethod
from typing import ClassVar, Union

import numpy as np
import scipy.sparse as sp

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

    def __init__(self, k: int, m: int, rng: np.random.Generator, **options):
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
        if one_dim:
            X = np.asarray(X, dtype=float)[:, None]
        elif not sp.issparse(X):
            X = np.asarray(X, dtype=float)
        if X.shape[0] != self.m:
            raise ValueError(f"projector expects {self.m} rows, got shape {X.shape}")
        start = time.perf_counter()
        if sp.issparse(X):
            out = self._apply(sp.csr_array(X))
        else:
            out = self._apply(X)
        self.apply_seconds += time.perf_counter() - start
        if one_dim:
            return np.asarray(out).ravel()
        return out

    def matrix(self) -> np.ndarray:
        """The explicit dense k x m matrix (for tests and small m only)."""
        return np.asarray(_dense(self._apply(np.eye(self.m))))

    def __repr__(self) -> str:
        return f"{type(self).__name__}(k={self.k}, m={self.m})"


def _dense(X: ArrayLike) -> np.ndarray:
    return X.toarray() if sp.issparse(X) else np.asarray(X)
