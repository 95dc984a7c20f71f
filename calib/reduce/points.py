"""Point sets: the pure JL distortion of a projected point cloud.

The points p_1..p_n in R^d (rows of :class:`calib.conic.PointSet`) are mapped to y_i = T p_i in R^k.
The distortion of a pair is |‖y_i - y_j‖² / ‖p_i - p_j‖² - 1|; a trial records its maximum and
99th percentile over the pairs checked, the number of pairs checked and the number of all pairs.

**Every pair up to** :data:`ALL_PAIRS_MAX_POINTS` **points.** Squared distances come from Gram
blocks through BLAS, ‖a - b‖² = ‖a‖² + ‖b‖² - 2 a·b: rows [s, e) against rows [s, n) at a time,
keeping the strict upper triangle, so a block holds at most :data:`BLOCK_ENTRIES` entries whatever n.
Cost per trial: n² k flops for the projected Gram (n = 10⁴, k = 200: 2·10¹⁰) plus O(n²) elementwise
work. The original squared distances do not depend on T: they are computed once per instance
(n² d flops) and cached in float32 (relative rounding ≤ 2⁻²⁴ ≈ 6e-8, far below any distortion
tolerance; 200 MB at n = 10⁴). The 99th percentile is exact (linear interpolation between order
statistics, as ``numpy.quantile``): only the top 1% of the distortions, plus one, are kept between
blocks, the rest are provably below it.

**Above** :data:`ALL_PAIRS_MAX_POINTS` **points** a uniform random sample of :data:`SAMPLED_PAIRS`
distinct pairs is checked, drawn from a stream keyed by n alone so every projector and replicate of
an instance meets the same pairs. A sample can only support a weaker claim: "no distortion above
the tolerance among s sampled pairs" means, with confidence 1 - a, that at most a fraction
1 - a^(1/s) of *all* pairs exceed it (the one-sided Clopper–Pearson bound for 0 of s; about 3/s at
95%), not that none do. ``pairs_checked`` < ``pairs_total`` in a record marks such a trial, and the
table states the widened claim (:func:`sampled_claim`).
"""

from __future__ import annotations

import time
from typing import Callable, Iterator, Optional

import numpy as np
from numpy.typing import DTypeLike

from calib.conic import PointSet
from calib.metrics import record
from calib.projectors.base import Projector
from calib.reduce.base import Handler
from calib.solvers.methods import Baseline
from calib.solvers.result import SolveResult

#: every pair is checked up to this many points (n(n-1)/2 ≈ 5·10⁷ pairs)
ALL_PAIRS_MAX_POINTS = 10_000
#: pairs sampled above that
SAMPLED_PAIRS = 2_000_000
#: entries of one Gram block (rows x columns); 8 bytes each
BLOCK_ENTRIES = 4_000_000
#: the quantile recorded beside the maximum
QUANTILE = 0.99


def total_pairs(n_points: int) -> int:
    """n(n-1)/2.

    >>> total_pairs(10_000)
    49995000
    """
    return n_points * (n_points - 1) // 2


def sampled_claim(pairs_checked: int, pairs_total: int, confidence: float = 0.95) -> Optional[float]:
    """The largest share of all pairs that may exceed the tolerance when none of the checked did.

    None when every pair was checked; else 1 - (1 - confidence)^(1/s), the one-sided Clopper–Pearson
    upper bound for 0 events in s = ``pairs_checked`` draws (Clopper & Pearson 1934).

    >>> sampled_claim(10, 10) is None
    True
    >>> round(sampled_claim(2_000_000, 10**9) * 2_000_000, 6)   # about 3 / s: -ln(0.05) = 2.995732
    2.99573
    """
    if pairs_checked >= pairs_total:
        return None
    return float(-np.expm1(np.log1p(-confidence) / pairs_checked))


def pair_sample(n_points: int, pairs: int = SAMPLED_PAIRS) -> tuple[np.ndarray, np.ndarray]:
    """(i, j) with i < j: ``pairs`` distinct pairs drawn uniformly, from a stream keyed by n alone.

    >>> i, j = pair_sample(20_000, pairs=1000)
    >>> len(set(zip(i.tolist(), j.tolist()))), bool(np.all(i < j))
    (1000, True)
    """
    rng = np.random.default_rng([n_points, 0x9A125])
    chosen = np.empty(0, dtype=np.int64)
    total = total_pairs(n_points)
    while chosen.size < pairs:  # draw pair ranks, drop repeats, top up (rarely more than one round)
        chosen = np.unique(np.concatenate([chosen, rng.integers(0, total, size=pairs - chosen.size)]))
    # rank r -> (i, j) in row-major order of the strict upper triangle
    i = (n_points - 2 - np.floor(np.sqrt(-8.0 * chosen + 4.0 * n_points * (n_points - 1) - 7) / 2.0 - 0.5)).astype(np.int64)
    j = (chosen + i + 1 - total + (n_points - i) * (n_points - i - 1) // 2).astype(np.int64)
    return i, j


def _block_rows(n_points: int, start: int) -> int:
    return max(1, BLOCK_ENTRIES // max(1, n_points - start))


def upper_blocks(gram_rows: Callable[[int, int], tuple[np.ndarray, np.ndarray]],
                 n_points: int) -> Iterator[tuple[int, int, np.ndarray]]:
    """Yield (start, stop, block) with block[r, c] = ‖a_{start+r} - a_{start+r+1+c'}‖² over the strict
    upper triangle, flattened row by row; ``gram_rows(start, stop)`` returns (rows (b, n - start) Gram
    part, squared norms of all points)."""
    start = 0
    while start < n_points - 1:
        stop = min(n_points - 1, start + _block_rows(n_points, start))
        gram, norms = gram_rows(start, stop)
        distances = norms[start:stop, None] + norms[None, start:] - 2.0 * gram
        keep = np.arange(start, n_points)[None, :] > np.arange(start, stop)[:, None]
        yield start, stop, np.maximum(distances[keep], 0.0)
        start = stop


def _gram_of(points: np.ndarray):
    norms = np.einsum("ij,ij->i", points, points)
    return lambda start, stop: (points[start:stop] @ points[start:].T, norms)


def all_pair_squared_distances(points: np.ndarray, dtype: DTypeLike = np.float32) -> np.ndarray:
    """‖p_i - p_j‖² for i < j in row-major order of the strict upper triangle, shape (n(n-1)/2,), of
    the rows of ``points`` (n, d); float32 by default (half the memory of the n² / 2 values)."""
    n = points.shape[0]
    out = np.empty(total_pairs(n), dtype=dtype)
    at = 0
    for _, _, block in upper_blocks(_gram_of(points), n):
        out[at:at + block.size] = block
        at += block.size
    return out


class TopShare:
    """The exact ``QUANTILE`` of a stream of values seen block by block, keeping only its top share."""

    def __init__(self, total: int, quantile: float = QUANTILE):
        self.rank = quantile * (total - 1)          # numpy's linear-interpolation position
        self.keep = total - int(np.floor(self.rank))  # x[floor(h)] and x[floor(h) + 1] are among the top `keep`
        self.values = np.empty(0)
        self.maximum = 0.0

    def add(self, values: np.ndarray) -> None:
        """Take in one block of values (any shape; flattened), keeping only the top share."""
        if values.size:
            self.maximum = max(self.maximum, float(values.max()))
        self.values = np.concatenate([self.values, values])
        if self.values.size > 2 * self.keep:
            self.values = np.partition(self.values, self.values.size - self.keep)[-self.keep:]

    def quantile(self) -> float:
        """The ``QUANTILE`` of every value added, as ``numpy.quantile`` (linear interpolation) gives it."""
        top = np.sort(self.values)[-self.keep:]
        fraction = self.rank - np.floor(self.rank)
        return float(top[0] + fraction * (top[1] - top[0])) if top.size > 1 else float(top[0])


def distortion_summary(originals: np.ndarray, projected: np.ndarray) -> tuple[float, float, int]:
    """(max, 99th percentile, pairs) of the distortion of every pair; ``originals`` from
    :func:`all_pair_squared_distances`, ``projected`` the (n, k) projected points."""
    n = projected.shape[0]
    tracker = TopShare(total_pairs(n))
    for start, stop, block in upper_blocks(_gram_of(projected), n):
        first = start * n - start * (start + 1) // 2           # rank of pair (start, start + 1)
        before = originals[first:first + block.size]
        tracker.add(np.abs(block / before - 1.0))
    return tracker.maximum, tracker.quantile(), total_pairs(n)


def pair_squared_distances(points: np.ndarray, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    """‖p_i - p_j‖² for the listed pairs, with points of shape (n, d); in chunks of bounded memory."""
    out = np.empty(i.size)
    step = max(1, BLOCK_ENTRIES // points.shape[1])
    for start in range(0, i.size, step):
        a, b = i[start:start + step], j[start:start + step]
        out[start:start + step] = np.sum((points[a] - points[b]) ** 2, axis=1)
    return out


def _original_pairs(points: PointSet):
    """What every trial of an instance compares against, cached on the point set (a worker keeps its
    instances between trials): all original squared distances, or the sampled pairs and theirs."""
    cached = points.__dict__.get("_calib_pairs")
    if cached is None:
        if points.n_points <= ALL_PAIRS_MAX_POINTS:
            cached = (None, None, all_pair_squared_distances(points.points))
        else:
            i, j = pair_sample(points.n_points)
            cached = (i, j, pair_squared_distances(points.points, i, j))
        points.__dict__["_calib_pairs"] = cached
    return cached


def measure(points: PointSet, projected: np.ndarray) -> dict:
    """distortion_max, distortion_q99, pairs_checked and pairs_total of one projected point set (n, k)."""
    i, j, before = _original_pairs(points)
    if i is None:
        worst, q99, checked = distortion_summary(before, projected)
    else:
        distortion = np.abs(pair_squared_distances(projected, i, j) / before - 1.0)
        worst, q99, checked = float(distortion.max()), float(np.quantile(distortion, QUANTILE)), i.size
    return dict(distortion_max=worst, distortion_q99=q99, pairs_checked=checked, pairs_total=total_pairs(points.n_points))


def sketched(points: PointSet, projector: Projector) -> tuple[np.ndarray, float]:
    """(the projected points T x_i as rows, shape (n, k); t_sketch: drawing T plus applying it, in s)."""
    start = time.perf_counter()
    projected = np.asarray(projector.apply(points.columns)).T
    return projected, projector.draw_seconds + (time.perf_counter() - start)


class PointsHandler(Handler):
    """Coordinates projected (d -> k); the distortion is the whole measurement (retrieval ``none``)."""

    kind = "points"
    retrievals = {"none": None}
    default_retrieval = "none"

    @staticmethod
    def projected_dim(points: PointSet) -> int:
        """d, the coordinates of each point that T of shape (k, d) shrinks."""
        return points.dim

    @staticmethod
    def solve_original(points: PointSet, solver: dict) -> SolveResult:
        """A point set has nothing to solve: a placeholder result (status "optimal", zero time) keeps
        the per-instance cache uniform; the metrics record leaves the solve fields empty."""
        return SolveResult(status="optimal", solver="none", solver_code=0, solver_message="point set: nothing to solve")

    @classmethod
    def solve_baseline(cls, points: PointSet, solver: dict) -> Baseline:
        """The placeholder of :meth:`solve_original` as the one "method" ``none``."""
        return Baseline({"none": cls.solve_original(points, solver)}, "none", "none")

    @classmethod
    def trial_records(cls, points: PointSet, original: SolveResult, projector: Projector, retrievals: list[str],
                      solver: dict, baseline: Optional[dict] = None) -> list[dict]:
        """One record (retrieval ``none``): distortion max, 99th percentile, pairs checked and in all, t_sketch."""
        projected, t_sketch = sketched(points, projector)
        values = measure(points, projected)
        return [record(**values, t_sketch=t_sketch) for _ in cls.retrieval_names(retrievals)]
