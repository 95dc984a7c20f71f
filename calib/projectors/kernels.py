"""Kernels that apply a drawn sparse T (k x m) to X along its rows: T @ X.

Construction lives in :mod:`construct`; these functions only multiply. X (m x n) is never copied
or converted, and every path reads it in its stored order:

* CSR X: SciPy's sparse-sparse product with T in CSR, sum over i of nnz(T[:, i]) · nnz(X[i, :])
  operations — O(s · nnz(X)) when every column of T has s nonzeros — or, for T with exactly s
  nonzeros per column, :func:`column_accumulate`: X streamed once per nonzero of a column into a
  dense k x n accumulator, used when that accumulator is no larger than X;
* CSC X: (Xᵀ Tᵀ)ᵀ, whose factors Xᵀ (CSR) and Tᵀ (CSR, the transpose of T in CSC) are views;
* dense X: SciPy's sparse-dense product with T in CSC (X read row by row in order), O(nnz(T) · n),
  or, when T is dense enough for BLAS to win (:data:`BLAS_DENSITY`), blocks of rows of T expanded
  and multiplied by BLAS, O(k · m · n) flops with one block of T dense at a time.

Sparse input gives sparse output in the same format (CSR or CSC); dense input gives dense.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import scipy.sparse as sp

#: Above this fraction of nonzeros, a dense X is multiplied by expanded blocks of T through BLAS
#: (measured crossover on this project's machines: 0.02–0.05 depending on BLAS threads).
BLAS_DENSITY = 0.04
#: Bytes of T expanded at a time on the BLAS path.
BLOCK_BYTES = 1 << 23
#: Nonzeros of X handled per step of :func:`column_accumulate` (bounds its temporaries).
CHUNK_NONZEROS = 1 << 16

#: ``T_in(fmt)`` returns T in "csr" or "csc" format.
MatrixIn = Callable[[str], sp.sparray]


def sparse_times(T_in: MatrixIn, X: np.ndarray | sp.sparray | sp.spmatrix, shape: tuple[int, int], nnz: int) -> np.ndarray | sp.sparray:
    """T @ X for X dense (m, n) or scipy.sparse CSR/CSC (m, n); T has ``shape`` and ``nnz``."""
    if sp.issparse(X):
        if X.format == "csc":
            return (X.T @ T_in("csc").T).T
        return T_in("csr") @ X
    if nnz >= BLAS_DENSITY * shape[0] * shape[1]:
        return blas_times(T_in("csr"), X)
    return T_in("csc") @ X


def blas_times(T: sp.csr_array, X: np.ndarray) -> np.ndarray:
    """T @ X with T expanded a block of rows at a time and multiplied through BLAS."""
    k, m = T.shape
    out = np.empty((k, X.shape[1]))
    block = max(1, BLOCK_BYTES // (8 * m))
    for first in range(0, k, block):
        last = min(k, first + block)
        np.matmul(T[first:last].toarray(), X, out=out[first:last])
    return out


def accumulator_fits(k: int, X: sp.sparray) -> bool:
    """True when a dense k x n float accumulator takes no more memory than the CSR arrays of X."""
    return 8 * k * X.shape[1] <= X.data.nbytes + X.indices.nbytes + X.indptr.nbytes


def column_accumulate(rows: np.ndarray, values: np.ndarray, k: int, X: sp.csr_array) -> sp.csr_array:
    """T @ X for T with exactly s nonzeros per column and X in CSR.

    ``rows`` and ``values`` (m x s) give, for each column j of T, its nonzero rows and values.
    Entry (j, c, v) of X adds ``values[j, t] · v`` at (``rows[j, t]``, c) of a dense k x n
    accumulator, for t < s, a chunk of X's nonzeros at a time; the accumulator is then compressed
    to CSR. Time O(s · nnz(X) + k · n); memory k · n floats plus the output.
    """
    m, n = X.shape
    total = np.zeros(k * n)
    per_chunk = max(1, CHUNK_NONZEROS * m // max(1, X.nnz))
    for first in range(0, m, per_chunk):
        last = min(m, first + per_chunk)
        counts = np.diff(X.indptr[first:last + 1])
        start, stop = X.indptr[first], X.indptr[last]
        columns, data = X.indices[start:stop], X.data[start:stop]
        for t in range(rows.shape[1]):
            keys = np.repeat(rows[first:last, t].astype(np.int64) * n, counts)
            keys += columns
            weights = np.repeat(values[first:last, t], counts)
            weights *= data
            np.add.at(total, keys, weights)
    return dense_to_csr(total.reshape(k, n))


def dense_to_csr(dense: np.ndarray, block_rows: int = 128) -> sp.csr_array:
    """The nonzeros of a dense matrix as a canonical CSR array, built a block of rows at a time
    so no temporary grows with the number of nonzeros."""
    k, n = dense.shape
    indptr = np.zeros(k + 1, dtype=np.int64)
    np.cumsum(np.count_nonzero(dense, axis=1), out=indptr[1:])
    index_dtype = np.int32 if max(n, indptr[-1]) < 2**31 else np.int64
    indices = np.empty(indptr[-1], dtype=index_dtype)
    data = np.empty(indptr[-1])
    for first in range(0, k, block_rows):
        block = dense[first:first + block_rows].ravel()
        span = slice(indptr[first], indptr[min(k, first + block_rows)])
        positions = np.flatnonzero(block)
        data[span] = block[positions]
        indices[span] = np.remainder(positions, n, out=positions)
    return sp.csr_array((data, indices, indptr.astype(index_dtype)), shape=(k, n))
