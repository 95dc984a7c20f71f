"""Drawing sparse random sign matrices (construction only; applying them is in :mod:`kernels`).

Two constructions of a k x m sparse matrix whose nonzeros are ``±scale`` with independent fair
signs:

* :func:`bernoulli_signs` (CSR) — every entry independently nonzero with probability
  ``density`` (Achlioptas 2003; Li, Hastie & Church 2006). Drawn in O(nnz) time by jumping from
  one nonzero to the next with geometric gaps, never touching the k·m zeros.
* :func:`column_signs` (CSC) — exactly ``s`` nonzeros per column in distinct rows chosen
  uniformly (sparse JL; CountSketch when s = 1), drawn by Floyd's subset sampling, vectorised
  over columns.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

#: Entries of the k x m grid scanned per block by :func:`bernoulli_signs`.
BLOCK_ENTRIES = 1 << 22


def random_signs(count: int, rng: np.random.Generator) -> np.ndarray:
    """``count`` independent fair ±1.0 values."""
    return rng.integers(0, 2, size=count).astype(float) * 2.0 - 1.0


def bernoulli_positions(total: int, density: float, rng: np.random.Generator) -> np.ndarray:
    """Sorted positions in ``[0, total)`` of i.i.d. Bernoulli(``density``) successes.

    The gaps between successive successes are i.i.d. geometric(``density``), so cumulative sums
    of geometric draws give exactly the positions of independent Bernoulli trials.
    """
    if density >= 1.0:
        return np.arange(total, dtype=np.int64)
    mean = total * density
    batch = int(mean + 6.0 * np.sqrt(mean) + 16)
    parts, end = [], -1
    while end < total:
        positions = end + np.cumsum(rng.geometric(density, size=batch), dtype=np.int64)
        parts.append(positions)
        end = int(positions[-1])
        batch = max(16, batch // 4)
    positions = np.concatenate(parts)
    return positions[: np.searchsorted(positions, total)]


def bernoulli_signs(k: int, m: int, density: float, scale: float, rng: np.random.Generator) -> sp.csr_array:
    """k x m matrix with i.i.d. entries: ±scale with probability density/2 each, else 0.

    Drawn a block of rows at a time so the int64 positions never outweigh the finished matrix.
    """
    block = max(1, BLOCK_ENTRIES // m)
    counts, columns = [], []
    for first in range(0, k, block):
        rows = min(block, k - first)
        rows_of, cols = np.divmod(bernoulli_positions(rows * m, density, rng), m)
        counts.append(np.bincount(rows_of, minlength=rows))
        columns.append(cols.astype(np.int32))
    indptr = np.zeros(k + 1, dtype=np.int64)
    np.cumsum(np.concatenate(counts), out=indptr[1:])
    cols = np.concatenate(columns)
    data = random_signs(cols.size, rng) * scale
    return _compressed(sp.csr_array, data, cols, indptr, (k, m))


def distinct_rows(k: int, m: int, s: int, rng: np.random.Generator) -> np.ndarray:
    """(m, s) array: for each column, s distinct rows of ``range(k)``, uniform over subsets.

    Floyd's algorithm (J. Bentley with R. Floyd, "A sample of brilliance", Communications of the
    ACM 30(9), 1987): for j = k-s, ..., k-1 draw t uniform in [0, j]; keep t unless already chosen,
    then keep j. Vectorised over the m columns; O(s² m) comparisons.
    """
    chosen = np.empty((m, s), dtype=np.int64)
    for step, top in enumerate(range(k - s, k)):
        pick = rng.integers(0, top + 1, size=m)
        taken = (chosen[:, :step] == pick[:, None]).any(axis=1)
        chosen[:, step] = np.where(taken, top, pick)
    return chosen


def column_signs(k: int, m: int, s: int, scale: float, rng: np.random.Generator) -> sp.csc_array:
    """k x m matrix (CSC) with exactly s nonzeros ±scale per column, in s distinct uniform rows,
    sorted within each column."""
    rows = np.sort(distinct_rows(k, m, s, rng), axis=1)
    data = random_signs(m * s, rng) * scale
    indptr = np.arange(0, m * s + 1, s, dtype=np.int64)
    return _compressed(sp.csc_array, data, rows.ravel(), indptr, (k, m))


def _compressed(kind, data: np.ndarray, indices: np.ndarray, indptr: np.ndarray, shape: tuple[int, int]):
    """CSR or CSC array with the smallest index dtype that fits (int32 keeps scipy's kernels
    copy-free)."""
    index_dtype = np.int32 if max(max(shape), indices.size) < 2**31 else np.int64
    return kind((data, indices.astype(index_dtype, copy=False), indptr.astype(index_dtype, copy=False)), shape=shape)
