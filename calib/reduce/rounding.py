"""Random-hyperplane rounding of a max-cut SDP matrix, and the cut ratio of a retrieved matrix.

The max-cut relaxation of a graph with symmetric weights W (n x n, zero or ignored diagonal) is
max 1/4 <L, X> s.t. X_ii = 1, X PSD, with L = diag(W 1) - W the Laplacian; the ``sdp-maxcut``
family stores it as min <C, X> with C = -L/4 (:mod:`calib.families.sdp`), so W is recovered from
the problem as ``W = 4 * (C - diag(diag(C)))`` (the off-diagonal part of C is W/4), which
:func:`maxcut_weights` computes.

Rounding (Goemans and Williamson 1995). Factor X = V V^T (row v_i of V for node i), draw a
direction r ~ N(0, I) and put node i on side s_i = sign(v_i . r) (a zero counts as +1). The cut is

    cut(s) = sum_{i<j} w_ij [s_i != s_j] = 1/4 s^T L s = (sum(W) - s^T W s) / 4,   s in {-1, +1}^n,

and edge ij is cut with probability arccos(X_ij)/pi when X has unit diagonal, so
E[cut] = sum_{i<j} w_ij arccos(X_ij)/pi (:func:`expected_cut`) >= 0.87856 * 1/4 <L, X> for
nonnegative weights.

Which matrix is rounded. :func:`unit_diagonal` first makes any symmetric X a feasible point of the
relaxation: negative eigenvalues clipped to 0 (the nearest PSD matrix in the Frobenius norm,
Higham 1988; positive ones at most :data:`ZERO_EIGENVALUE_RTOL` times the largest count as 0 too),
then D^{-1/2} X D^{-1/2} with D = diag(X). A node whose clipped diagonal is at most
:data:`ZERO_DIAGONAL_RTOL` times the largest one has a zero vector; it gets a unit vector of its
own, orthogonal to all others (row and column e_i), so its side is a fair coin independent of the
rest. The directions act on the principal square root X^{1/2} = Q sqrt(Lambda) Q^T (n x n): for
g ~ N(0, I_n), X^{1/2} g = V (Q^T g) with Q^T g ~ N(0, I_r), so the signs have the law of the
rounding above, while two nearby matrices, rounded with the same g, get nearby rows
(||A^{1/2} - B^{1/2}||_2 <= ||A - B||_2^{1/2} for PSD A, B; Bhatia 1997, ch. X) and mostly the
same signs.

:func:`cut_ratio` compares the MEAN rounded cut of a retrieved matrix with that of the original's,
both rounded with the same directions (common random numbers). The mean estimates E[cut], a smooth
function of X, with a standard error O(1/sqrt(draws)) that the shared directions shrink further
(the two cuts of one draw are positively correlated, the more so the closer the matrices). The best cut over
the draws is an extreme order statistic: it grows with the number of draws and, on small graphs,
reaches the max-cut from both matrices after a few draws, so its ratio says little about the
retrieved matrix.

Shapes: W (n, n) dense or scipy.sparse, X (n, n) dense, signs (n,), directions (draws, n).
Costs: one eigendecomposition, O(n^3), per matrix; then O(n^2 + nnz(W)) per draw, in blocks of at
most :data:`BLOCK_ENTRIES` direction entries (memory O(n^2 + BLOCK_ENTRIES)).

References: M. X. Goemans and D. P. Williamson, "Improved approximation algorithms for maximum cut
and satisfiability problems using semidefinite programming", J. ACM 42(6):1115–1145, 1995.
N. J. Higham, "Computing a nearest symmetric positive semidefinite matrix", Linear Algebra Appl.
103:103–118, 1988. R. Bhatia, "Matrix Analysis", Springer GTM 169, 1997.
"""

from __future__ import annotations

from typing import Iterator, NamedTuple, Optional

import numpy as np
import scipy.sparse as sp

from calib.checks import is_integer
from calib.conic import StandardSDP
from calib.errors import InputError
from calib.problems import Matrix

#: A diagonal entry of the clipped matrix at most this times the largest one counts as zero.
ZERO_DIAGONAL_RTOL = 1e-12
#: Eigenvalues at most this times the largest one count as zero (rounding noise of a rank-deficient X).
ZERO_EIGENVALUE_RTOL = 1e-12
#: Relative tolerance of the symmetry checks, scaled by max(1, max |entry|).
SYMMETRY_RTOL = 1e-10
#: Largest number of direction entries (draws x n) held at once.
BLOCK_ENTRIES = 1 << 20


class RoundedCut(NamedTuple):
    """Best and mean cut value over the draws of a rounding (units of the edge weights)."""

    best: float
    mean: float


def maxcut_weights(sdp: StandardSDP) -> np.ndarray:
    """Edge weights W = 4 (C - diag(diag(C))), shape (n, n), of a max-cut SDP stored as min <-L/4, X>.

    >>> from calib.families import get
    >>> family = get("sdp-maxcut")
    >>> cycle = family.make(family.resolve({"graph": "cycle", "nodes": 4}, "demo"), 0, np.random.default_rng(0))
    >>> maxcut_weights(cycle.problem).tolist()
    [[0.0, 1.0, 0.0, 1.0], [1.0, 0.0, 1.0, 0.0], [0.0, 1.0, 0.0, 1.0], [1.0, 0.0, 1.0, 0.0]]
    """
    C = np.asarray(sdp.C, dtype=float)
    return 4.0 * (C - np.diag(np.diag(C))) + 0.0


def _dense(M) -> np.ndarray:
    return M.toarray() if sp.issparse(M) else np.asarray(M, dtype=float)


def _check_square(where: str, M, order: Optional[int] = None) -> None:
    """InputError unless M is a finite symmetric (order x order) matrix."""
    shape = M.shape
    if len(shape) != 2 or shape[0] != shape[1] or shape[0] == 0 or (order is not None and shape[0] != order):
        expected = "(n, n)" if order is None else f"({order}, {order})"
        raise InputError(where, f"has shape {shape}, expected {expected}", "give a square matrix with one row per node")
    dense = _dense(M)
    if not np.isfinite(dense).all():
        raise InputError(where, "has a NaN or infinite entry", "give finite values")
    scale = max(1.0, float(np.abs(dense).max()))
    if np.abs(dense - dense.T).max() > SYMMETRY_RTOL * scale:
        raise InputError(where, "is not symmetric", "pass a symmetric matrix")


def _check_pair(W, X, where: str = "X") -> None:
    _check_square("W", W)
    _check_square(where, X, W.shape[0])


def _check_draws(draws: int) -> None:
    if not is_integer(draws) or draws < 1:
        raise InputError("draws", f"must be an integer >= 1, got {draws!r}", "give the number of random hyperplanes")


def _positive_eigen(X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Square roots of the positive eigenvalues of symmetric X, shape (r,), and their eigenvectors (n, r).

    Eigenvalues at most ZERO_EIGENVALUE_RTOL times the largest count as zero.
    """
    values, vectors = np.linalg.eigh((X + X.T) / 2.0)
    keep = values > ZERO_EIGENVALUE_RTOL * max(float(values[-1]), 0.0)
    return np.sqrt(values[keep]), vectors[:, keep]


def _unit_diagonal(X: np.ndarray) -> np.ndarray:
    roots, vectors = _positive_eigen(X)
    clipped = (vectors * roots**2) @ vectors.T
    diagonal = np.diag(clipped).copy()
    zero = diagonal <= ZERO_DIAGONAL_RTOL * max(float(diagonal.max()), 0.0)
    scale = np.where(zero, 0.0, 1.0 / np.sqrt(np.where(zero, 1.0, diagonal)))
    unit = clipped * scale[:, None] * scale[None, :]
    unit = (unit + unit.T) / 2.0
    np.fill_diagonal(unit, 1.0)
    return unit


def unit_diagonal(X: np.ndarray) -> np.ndarray:
    """The feasible max-cut SDP point made from symmetric X, shape (n, n): PSD with unit diagonal.

    Negative eigenvalues are clipped to 0, then rows and columns are scaled by 1/sqrt(X_ii); a node
    whose clipped diagonal is at most ZERO_DIAGONAL_RTOL times the largest gets row and column e_i
    (a unit vector of its own, see the module docstring).

    >>> unit_diagonal(np.array([[1.0, 2.0], [2.0, 1.0]])).round(12).tolist()
    [[1.0, 1.0], [1.0, 1.0]]
    >>> unit_diagonal(np.array([[4.0, 0.0], [0.0, -1.0]])).round(12).tolist()
    [[1.0, 0.0], [0.0, 1.0]]
    """
    _check_square("X", X)
    return _unit_diagonal(_dense(X))


def gram_vectors(X: np.ndarray) -> np.ndarray:
    """V with V V^T = X_+ (the PSD part of symmetric X), shape (n, r), r = number of positive eigenvalues.

    Eigenvalues at most ZERO_EIGENVALUE_RTOL times the largest count as zero, so r is the numerical rank.

    Column j is sqrt(lambda_j) q_j for the eigenpairs (lambda_j > 0, q_j) of X; row i is the vector of node i.

    >>> V = gram_vectors(np.array([[1.0, 1.0], [1.0, 1.0]]))
    >>> V.shape, (V @ V.T).round(12).tolist()
    ((2, 1), [[1.0, 1.0], [1.0, 1.0]])
    """
    _check_square("X", X)
    roots, vectors = _positive_eigen(_dense(X))
    return vectors * roots


def _square_root(X: np.ndarray) -> np.ndarray:
    """Principal square root X_+^{1/2} = Q sqrt(Lambda_+) Q^T, shape (n, n): a Gram factor of X_+."""
    roots, vectors = _positive_eigen(X)
    return (vectors * roots) @ vectors.T


def _cut_values(W: Matrix, signs: np.ndarray) -> np.ndarray:
    """(sum(W) - s^T W s) / 4 for each column s of signs (n, draws): shape (draws,)."""
    total = float(W.sum())
    return (total - np.einsum("id,id->d", signs, np.asarray(W @ signs))) / 4.0


def cut_value(W: Matrix, signs: np.ndarray) -> float:
    """sum_{i<j} w_ij [s_i != s_j] = 1/4 s^T L s for W (n, n) symmetric, dense or sparse, s in {-1, +1}^n.

    The diagonal of W (self-loops) does not count. Units: those of the weights.

    >>> triangle = np.ones((3, 3)) - np.eye(3)
    >>> cut_value(triangle, np.array([1, -1, 1]))
    2.0
    """
    _check_square("W", W)
    s = np.asarray(signs, dtype=float)
    if s.shape != (W.shape[0],) or not np.isin(s, (-1.0, 1.0)).all():
        raise InputError("signs", f"must be {W.shape[0]} values in {{-1, +1}}, got shape {s.shape}", "give one side per node")
    return float(_cut_values(W, s[:, None])[0])


def expected_cut(W: Matrix, X: np.ndarray) -> float:
    """E[cut] of the rounding of unit_diagonal(X): sum_{i<j} w_ij arccos(X_ij)/pi (Goemans–Williamson 1995).

    >>> expected_cut(np.array([[0.0, 1.0], [1.0, 0.0]]), np.eye(2))
    0.5
    """
    _check_pair(W, X)
    angles = np.arccos(np.clip(_unit_diagonal(_dense(X)), -1.0, 1.0)) / np.pi
    return float(np.sum(_dense(W) * angles) / 2.0)


def _direction_blocks(order: int, draws: int, rng: np.random.Generator) -> Iterator[np.ndarray]:
    """Gaussian directions, (block, order) arrays in turn, draws rows in all (same stream as one draw)."""
    block = max(1, BLOCK_ENTRIES // order)
    for start in range(0, draws, block):
        yield rng.standard_normal((min(block, draws - start), order))


def _rounded_cuts(W: Matrix, matrices: list, draws: int, rng: np.random.Generator) -> list:
    """Cut values (draws,) of each matrix rounded with the same directions (validated inputs)."""
    roots = [_square_root(_unit_diagonal(_dense(X))) for X in matrices]
    cuts = [[] for _ in roots]
    for directions in _direction_blocks(W.shape[0], draws, rng):
        for root, out in zip(roots, cuts):
            signs = np.where(root @ directions.T >= 0.0, 1.0, -1.0)
            out.append(_cut_values(W, signs))
    return [np.concatenate(out) for out in cuts]


def hyperplane_cuts(W: Matrix, X: np.ndarray, draws: int, rng: np.random.Generator) -> np.ndarray:
    """Cut values of ``draws`` random hyperplanes through the Gram vectors of unit_diagonal(X), shape (draws,).

    W: (n, n) symmetric weights, dense or sparse; X: (n, n) symmetric. Each draw takes n standard
    normals from ``rng`` (the direction g; s = sign(X^{1/2} g), zeros to +1).

    >>> edge = np.array([[0.0, 1.0], [1.0, 0.0]])
    >>> hyperplane_cuts(edge, -edge + np.eye(2), 3, np.random.default_rng(0)).tolist()
    [1.0, 1.0, 1.0]
    """
    _check_pair(W, X)
    _check_draws(draws)
    return _rounded_cuts(W, [X], int(draws), rng)[0]


def rounded_cut(W: Matrix, X: np.ndarray, draws: int, rng: np.random.Generator) -> RoundedCut:
    """Best and mean of :func:`hyperplane_cuts` over ``draws`` hyperplanes.

    >>> square = np.roll(np.eye(4), 1, axis=1) + np.roll(np.eye(4), -1, axis=1)   # the 4-cycle
    >>> sides = np.array([1.0, -1.0, 1.0, -1.0])
    >>> rounded_cut(square, np.outer(sides, sides), 5, np.random.default_rng(0))
    RoundedCut(best=4.0, mean=4.0)
    """
    cuts = hyperplane_cuts(W, X, draws, rng)
    return RoundedCut(best=float(cuts.max()), mean=float(cuts.mean()))


def cut_ratio(W: Matrix, X_retrieved: np.ndarray, X_original: np.ndarray, draws: int, seed: int) -> Optional[float]:
    """Mean rounded cut of X_retrieved over that of X_original, same directions for both (unitless).

    Both matrices pass through :func:`unit_diagonal` and are rounded with the same ``draws``
    Gaussian directions drawn from ``np.random.default_rng(seed)`` (why the mean, and why shared
    directions: module docstring). None when the original's mean cut is 0 (no edge ever cut).

    >>> triangle = np.ones((3, 3)) - np.eye(3)
    >>> cut_ratio(triangle, np.eye(3), np.eye(3), 100, seed=1)
    1.0
    """
    _check_pair(W, X_retrieved, "X_retrieved")
    _check_square("X_original", X_original, W.shape[0])
    _check_draws(draws)
    retrieved, original = _rounded_cuts(W, [X_retrieved, X_original], int(draws), np.random.default_rng(seed))
    denominator = float(original.mean())
    return None if denominator == 0.0 else float(retrieved.mean()) / denominator
