"""Fast Walsh–Hadamard transform through BLAS (the kernel behind the SRHT projector).

The Sylvester–Hadamard matrix of order 2^p factors as a Kronecker product of smaller Hadamard
matrices, H_{ab} = H_a ⊗ H_b, because H[i, j] = (-1)^popcount(i & j) splits over groups of bits.
Writing a row index in mixed radix (b_L, ..., b_1), the transform is one small dense product per
digit: ``np.matmul(H_b, Y.reshape(outer, b, inner * n))``. A butterfly in numpy would make p passes
over memory; this makes one pass per digit with BLAS doing the arithmetic.

Three savings on top of that, all exact:

* the diagonal weights (the SRHT's random signs and scale) are folded into the first digit's
  small matrices, so the input is read once and never copied or scaled on its own;
* zero padding up to the power of two is never materialised beyond what the slowest digit needs:
  blocks of rows that are entirely padding stay zero under every digit but the slowest, whose
  product simply skips them;
* when only some output rows are wanted (the SRHT's row sample), the slowest digit is applied to
  those rows only, grouped by their lower digits. Its radix is chosen per plan by a cost model
  (:func:`radix_bits`): a full digit costs about one pass over memory, the sampled digit about
  2·k·radix·n flops.

Reference for the structure: J. J. Sylvester (1867); the Kronecker factorisation of fast
transforms is I. J. Good, "The interaction algorithm and practical Fourier analysis", J. Royal
Statistical Society B 20(2), 1958.

Shapes: inputs are dense ``(m, n)`` float arrays; ``size`` is the next power of two >= m.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Optional

import numpy as np
from scipy.linalg import hadamard

#: Largest radix (as bits) of a digit applied to every row: one memory pass each, BLAS-cheap.
FULL_DIGIT_BITS = 3
#: Largest radix (as bits) of the slowest digit, applied to the sampled rows only.
LAST_DIGIT_BITS = 11
#: Cost of the sampled digit's flops per element relative to one full pass over memory:
#: 2·k·radix/size flops per element against one pass over memory per full digit
#: (measured on this project's machines, single thread).
FLOP_TO_PASS = 1.0 / 32.0
#: Bytes handled per step by the in-place middle digits (about an L2 cache).
CHUNK_BYTES = 1 << 20


def next_power_of_two(m: int) -> int:
    """Smallest power of two >= m (m >= 1)."""
    return 1 << max(0, int(m) - 1).bit_length()


@lru_cache(maxsize=None)
def _sylvester(order: int) -> np.ndarray:
    matrix = hadamard(order).astype(float)
    matrix.setflags(write=False)
    return matrix


def radix_bits(p: int, k: int, full_bits: int = FULL_DIGIT_BITS, last_bits: int = LAST_DIGIT_BITS) -> list[int]:
    """Split 2^p into digits, fastest first, for an output of k rows.

    The slowest digit takes ``last`` bits, chosen to minimise (number of full digits) +
    FLOP_TO_PASS · 2·k·2^last / 2^p; the other p - last bits are spread evenly over digits of
    at most ``full_bits`` bits.

    >>> radix_bits(14, 1024)
    [3, 3, 8]
    >>> radix_bits(14, 16)
    [3, 11]
    >>> radix_bits(3, 8)
    [3]
    >>> radix_bits(0, 1)
    [0]
    """
    def cost(last: int) -> float:
        return -(-(p - last) // full_bits) + FLOP_TO_PASS * 2.0 * k * 2.0 ** (last - p)

    last = min(range(min(p, last_bits) + 1), key=lambda bits: (cost(bits), -bits))
    rest = p - last
    count = -(-rest // full_bits)
    full = [rest // count + (1 if i < rest % count else 0) for i in range(count)] if count else []
    return full + [last]


class HadamardPlan:
    """Schedule for ``(H_size · diag(weights) · [X; 0])[rows]`` with H the ±1 Sylvester matrix.

    Built once per (weights, rows); :meth:`apply` then works for any number of columns. The
    output rows come in :attr:`rows` order, which groups rows sharing their lower digits (any
    order is a valid row sample; the plan fixes one).

    Parameters
    ----------
    weights : array of float, shape (m,)
        The diagonal applied before H (m >= 1).
    rows : array of int, optional
        Output rows to keep, distinct, in ``[0, size)``; all rows when omitted.
    """

    def __init__(self, weights: np.ndarray, rows: Optional[np.ndarray] = None,
                 full_bits: int = FULL_DIGIT_BITS, last_bits: int = LAST_DIGIT_BITS):
        self.m = int(weights.size)
        self.size = next_power_of_two(self.m)
        rows = np.arange(self.size) if rows is None else np.asarray(rows, dtype=np.int64)
        bits = radix_bits(self.size.bit_length() - 1, rows.size, full_bits, last_bits)
        self.radices = [1 << b for b in bits]
        self.last = self.radices[-1]
        self.stride = self.size // self.last
        self.blocks = -(-self.m // self.stride)  # slowest-digit blocks that hold input rows
        low, high = rows % self.stride, rows // self.stride
        order = np.lexsort((high, low))
        self.rows = rows[order]
        self._groups = self._group(low[order], high[order])
        self._weights = np.asarray(weights, dtype=float)
        self._first = self._weighted_first_digit() if len(self.radices) > 1 else None

    def _group(self, low: np.ndarray, high: np.ndarray) -> list[tuple[int, int, int, np.ndarray]]:
        """(first output row, end, lower-digit index, slowest-digit rows of H) per group."""
        starts = np.flatnonzero(np.r_[True, low[1:] != low[:-1]]) if low.size else np.array([], int)
        ends = np.r_[starts[1:], low.size]
        H = _sylvester(self.last)[:, : self.blocks]
        return [(int(a), int(b), int(low[a]), np.ascontiguousarray(H[high[a:b]]))
                for a, b in zip(starts, ends)]

    def _weighted_first_digit(self) -> np.ndarray:
        """H_b1 · diag(weights of block o) for each block o of b1 input rows: (ceil(m/b1), b1, b1)."""
        b = self.radices[0]
        padded = np.zeros(-(-self.m // b) * b)
        padded[: self.m] = self._weights
        return _sylvester(b)[None, :, :] * padded.reshape(-1, 1, b)

    def apply(self, X: np.ndarray) -> np.ndarray:
        """(H · diag(weights) · [X; 0])[rows] for dense X of shape (m, n)."""
        X = np.ascontiguousarray(X, dtype=float)
        Z = self._full_digits(X)
        out = np.empty((self.rows.size, X.shape[1]))
        Zv = Z.reshape(self.blocks, self.stride, X.shape[1])
        for start, end, low, H_rows in self._groups:
            np.matmul(H_rows, Zv[:, low, :], out=out[start:end])
        return out

    def _full_digits(self, X: np.ndarray) -> np.ndarray:
        """Weights and every digit but the slowest, on the blocks that hold input rows.

        Returns Z of shape (blocks * stride, n). The middle digits work in place, a cache-sized
        chunk at a time, so the only full-size buffer is Z.
        """
        n = X.shape[1]
        Z = np.empty((self.blocks * self.stride, n))
        self._first_digit(X, Z)
        inner = self.radices[0]
        for b in self.radices[1:-1]:
            _in_place_digit(Z.reshape(-1, b, inner * n), _sylvester(b))
            inner *= b
        return Z

    def _first_digit(self, X: np.ndarray, Z: np.ndarray) -> None:
        """Z = (I ⊗ H_b1) · diag(weights) · [X; 0], reading X once (only the weights with one digit)."""
        m, n = X.shape
        if self._first is None:
            np.multiply(X, self._weights[:, None], out=Z)
            return
        b = self.radices[0]
        whole = m // b
        np.matmul(self._first[:whole], X[: whole * b].reshape(whole, b, n), out=Z[: whole * b].reshape(whole, b, n))
        if whole * b < m:
            np.matmul(self._first[whole][:, : m - whole * b], X[whole * b:], out=Z[whole * b: (whole + 1) * b])
        Z[self._first.shape[0] * b:] = 0.0


def _in_place_digit(Y: np.ndarray, H: np.ndarray) -> None:
    """Y[o] = H @ Y[o] for every o, a chunk of about CHUNK_BYTES at a time through one buffer."""
    count = max(1, CHUNK_BYTES // (8 * Y.shape[1] * Y.shape[2]))
    buffer = np.empty((min(count, Y.shape[0]),) + Y.shape[1:])
    for first in range(0, Y.shape[0], count):
        chunk = Y[first:first + count]
        product = buffer[: chunk.shape[0]]
        np.matmul(H, chunk, out=product)
        chunk[...] = product


def walsh_hadamard(X: np.ndarray) -> np.ndarray:
    """Normalised Walsh–Hadamard transform of X along axis 0, zero-padded to a power of two.

    Returns ``(H_size / sqrt(size)) @ [X; 0]`` of shape (size, n), or (size,) for a vector of
    shape (m,), with H_size in the Sylvester ordering of ``scipy.linalg.hadamard``.

    >>> walsh_hadamard(np.array([1.0, 1.0, 1.0]))
    array([ 1.5,  0.5,  0.5, -0.5])
    """
    X = np.asarray(X, dtype=float)
    X2 = X[:, None] if X.ndim == 1 else X
    size = next_power_of_two(X2.shape[0])
    plan = HadamardPlan(np.full(X2.shape[0], 1.0 / np.sqrt(size)))
    out = plan.apply(X2)[np.argsort(plan.rows)]
    return out[:, 0] if X.ndim == 1 else out
