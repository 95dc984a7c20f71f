"""Clustering on projected points, judged on the original points.

The points x_1..x_n in R^d (rows of :class:`calib.problems.clustering.ClusteringProblem`) are mapped to
y_i = T x_i in R^k; the problem's method (:mod:`calib.solvers.kmeans`: ``lloyd`` or ``sized``)
clusters the y_i from the problem's seed, the same seed that clustered the x_i once per instance
(the original "solve", cached like any original). The retrieval ``partition`` keeps the projected
partition P' and computes its centres on the original points (the means of the x_i of each
cluster: what a user of the reduction gets back, O(n d) flops, timed as ``t_retrieve``).

Measurements (:mod:`calib.metrics`), with P the original partition and cost the k-means cost on
the *original* points (:func:`calib.problems.clustering.kmeans_cost`):

- ``cluster_cost_ratio`` = cost(P') / cost(P). Both partitions are local optima of one heuristic
  from the same seed, so the ratio can fall below 1 (the projected run found the better optimum);
  for exact optima it would be >= 1, and at most (1 + eps) / (1 - eps) whenever the projection keeps
  the cost of every K-partition within 1 +- eps (:func:`calib.theory.cost_ratio_eps`).
- ``cluster_disagreement``: the share of points P' assigns differently from P up to relabelling
  (:func:`disagreement`: the best relabelling by the Hungarian method, Kuhn 1955).
- ``proj_objective``: the cost of P' on the projected points (what the projected run minimised).

Times: ``t_sketch`` (draw T, apply it), ``t_solve_proj`` (cluster the projected points),
``t_retrieve``; the fair baseline ``t_baseline`` is the original clustered by the same method and
code (there is one method per problem, so the race of :mod:`calib.solvers.methods` has one entrant).
"""

from __future__ import annotations

import time
from typing import Optional

import numpy as np

from calib.metrics import record
from calib.problems.clustering import ClusteringProblem, cluster_means, kmeans_cost
from calib.projectors.base import Projector
from calib.reduce.points import PointsHandler, sketched
from calib.solvers.kmeans import cluster
from calib.solvers.methods import Baseline
from calib.solvers.result import SolveResult

#: statuses of a clustering that returned a partition (:mod:`calib.solvers.kmeans`)
PARTITIONED = ("optimal", "stopped_on_iterations")


def _time_limit(solver: dict) -> float:
    return float(solver.get("time_limit_s", 60.0))


class ClusteringHandler(PointsHandler):
    """Coordinates projected (d -> k) as for a point set, the projected points clustered, the
    partition judged on the original points."""

    kind = "clustering"
    retrievals = {"partition": None}
    default_retrieval = "partition"

    @staticmethod
    def solve_original(problem: ClusteringProblem, solver: dict) -> SolveResult:
        """The original points clustered by the problem's method (:func:`calib.solvers.kmeans.cluster`)."""
        result = cluster(problem, problem.points, _time_limit(solver), solver.get("highs"))
        result.method = problem.method
        return result

    @classmethod
    def solve_baseline(cls, problem: ClusteringProblem, solver: dict) -> Baseline:
        """The one method of the problem: the reference and the baseline at once."""
        return Baseline({problem.method: cls.solve_original(problem, solver)}, problem.method, problem.method)

    @classmethod
    def trial_records(cls, problem: ClusteringProblem, original: SolveResult, projector: Projector, retrievals: list[str],
                      solver: dict, baseline: Optional[dict] = None) -> list[dict]:
        """One record (retrieval ``partition``): the fields of the module docstring."""
        projected_points, t_sketch = sketched(problem, projector)
        limit = solver.get("projected_time_limit_s") or _time_limit(solver)
        projected = cluster(problem, projected_points, float(limit), solver.get("highs"))
        t_baseline = (baseline or {}).get("seconds") or original.seconds
        values = dict(orig_status=original.status, proj_status=projected.status, proj_message=projected.solver_message,
                      proj_method=problem.method, proj_iterations=projected.iterations, t_sketch=t_sketch,
                      t_solve_orig=original.seconds, t_baseline=t_baseline, t_solve_proj=projected.seconds)
        if original.x is not None and original.status in PARTITIONED:
            values["orig_objective"] = kmeans_cost(problem.points, original.x, problem.clusters)
        if projected.status in PARTITIONED:
            values.update(cls._judged(problem, original, projected))
        values["t_total"] = t_sketch + projected.seconds + values.get("t_retrieve", 0.0)
        values["time_saved"] = t_baseline - values["t_total"]
        return [record(**values) for _ in cls.retrieval_names(retrievals)]

    @staticmethod
    def _judged(problem: ClusteringProblem, original: SolveResult, projected: SolveResult) -> dict:
        """The retrieval (centres on the original points, timed) and the measurements of P' against P."""
        labels = projected.x.astype(np.int64)
        start = time.perf_counter()
        cluster_means(problem.points, labels, problem.clusters)
        values = {"t_retrieve": time.perf_counter() - start, "proj_objective": projected.objective}
        if original.x is not None and original.status in PARTITIONED:
            reference = kmeans_cost(problem.points, original.x, problem.clusters)
            values["cluster_cost_ratio"] = kmeans_cost(problem.points, labels, problem.clusters) / reference \
                if reference > 0 else None
            values["cluster_disagreement"] = disagreement(original.x, labels)
        return values


def disagreement(first: np.ndarray, second: np.ndarray) -> float:
    """Share of points the two labelings (shape (n,), labels 0..K-1) assign differently, after the best
    relabelling: 1 - max_sigma (1/n) sum_i [first_i = sigma(second_i)] over the bijections sigma of the
    labels. The maximum is the assignment problem on the K_a x K_b contingency table, solved by the
    Hungarian method (scipy's ``linear_sum_assignment``; H. W. Kuhn, "The Hungarian method for the
    assignment problem", Naval Research Logistics Quarterly 2:83–97, 1955). Cost O(n + K^3).

    >>> disagreement(np.array([0, 0, 1, 1, 2]), np.array([2, 2, 0, 0, 1]))
    0.0
    >>> disagreement(np.array([0, 0, 0, 1]), np.array([1, 1, 0, 0]))  # best relabelling 0 -> 1, 1 -> 0: 3 of 4 agree
    0.25
    """
    from scipy.optimize import linear_sum_assignment  # here, not at import: scipy.optimize alone took 1.6 s to import (-X importtime, 2 loaded cores)

    first, second = np.asarray(first, dtype=np.int64), np.asarray(second, dtype=np.int64)
    table = np.zeros((int(first.max()) + 1, int(second.max()) + 1), dtype=np.int64)
    np.add.at(table, (first, second), 1)
    rows, cols = linear_sum_assignment(table, maximize=True)
    return float(1.0 - table[rows, cols].sum() / first.size)
