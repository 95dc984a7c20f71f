"""Point sets: the pure JL distortion of a projected point cloud.

The points p_1..p_n in R^d (rows of :class:`calib.conic.PointSet`) are mapped to T p_i in R^k.
The distortion of a pair is |‖T(p - q)‖² / ‖p - q‖² - 1|; a trial records its maximum and 99th
percentile over the pairs checked. There is nothing to solve and nothing to retrieve: the one
retrieval name is ``none``.

Pairs checked: all n(n-1)/2 pairs when that is at most :data:`MAX_PAIRS`; otherwise the
deterministic cyclic sample {(i, (i + s) mod n) : 0 <= i < n, 1 <= s <= S} with
S = floor(MAX_PAIRS / n) (and S <= (n - 1) / 2 so no pair appears twice): every point meets its S
successors, every pair is an actual distinct pair, and the sample depends on n alone, so every
projector and replicate is measured on the same pairs.
"""

from __future__ import annotations

import time
from typing import Optional

import numpy as np

from calib.conic import PointSet
from calib.metrics import record
from calib.projectors.base import Projector
from calib.reduce.base import Handler
from calib.solvers.methods import Baseline
from calib.solvers.result import SolveResult

#: At most this many pairs are checked (all pairs below it).
MAX_PAIRS = 200_000
#: Pair differences are formed in chunks of about this many matrix entries.
CHUNK_ENTRIES = 4_000_000


def pair_sample(n_points: int, max_pairs: int = MAX_PAIRS) -> tuple[np.ndarray, np.ndarray]:
    """Index arrays (i, j) of the pairs checked (rule in the module docstring).

    >>> i, j = pair_sample(4)
    >>> list(zip(i.tolist(), j.tolist()))
    [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)]
    >>> i, j = pair_sample(10, max_pairs=20)
    >>> len(i), sorted(set(((j - i) % 10).tolist()))
    (20, [1, 2])
    """
    if n_points * (n_points - 1) // 2 <= max_pairs:
        return np.triu_indices(n_points, k=1)
    shifts = min(max_pairs // n_points, (n_points - 1) // 2)
    i = np.tile(np.arange(n_points), shifts)
    j = (i + np.repeat(np.arange(1, shifts + 1), n_points)) % n_points
    return i, j


def pair_squared_distances(points: np.ndarray, i: np.ndarray, j: np.ndarray) -> np.ndarray:
    """‖p_i - p_j‖² for each pair, with points of shape (n, d); computed in chunks of bounded memory."""
    out = np.empty(i.size)
    step = max(1, CHUNK_ENTRIES // points.shape[1])
    for start in range(0, i.size, step):
        a, b = i[start:start + step], j[start:start + step]
        out[start:start + step] = np.sum((points[a] - points[b]) ** 2, axis=1)
    return out


def pair_distortions(points: np.ndarray, projected: np.ndarray, i: np.ndarray, j: np.ndarray,
                     before: Optional[np.ndarray] = None) -> np.ndarray:
    """|‖y_i - y_j‖² / ‖p_i - p_j‖² - 1| for each pair, with points (n, d) and projected (n, k).

    ``before`` may carry the original squared distances of these pairs (they do not depend on T).
    """
    if before is None:
        before = pair_squared_distances(points, i, j)
    return np.abs(pair_squared_distances(projected, i, j) / before - 1.0)


def _original_pairs(points: PointSet):
    """(i, j, original squared distances) of the sampled pairs, cached on the point set: every trial
    of an instance measures the same pairs, and a worker keeps its instances between trials."""
    cached = points.__dict__.get("_calib_pairs")
    if cached is None:
        i, j = pair_sample(points.n_points)
        cached = (i, j, pair_squared_distances(points.points, i, j))
        points.__dict__["_calib_pairs"] = cached
    return cached


class PointsHandler(Handler):
    """Coordinates projected (d -> k); the distortion is the whole measurement (retrieval ``none``)."""

    kind = "points"
    retrievals = {"none": None}
    default_retrieval = "none"

    @staticmethod
    def projected_dim(points: PointSet) -> int:
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
        """One record (retrieval ``none``): distortion max, 99th percentile, pairs checked, t_sketch."""
        start = time.perf_counter()
        projected = np.asarray(projector.apply(points.columns)).T
        t_sketch = projector.draw_seconds + (time.perf_counter() - start)
        i, j, before = _original_pairs(points)
        distortion = pair_distortions(points.points, projected, i, j, before)
        values = dict(distortion_max=distortion.max(), distortion_q99=np.quantile(distortion, 0.99),
                      pairs_checked=i.size, t_sketch=t_sketch)
        return [record(**values) for _ in cls.retrieval_names(retrievals)]
