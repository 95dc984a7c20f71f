"""K-means by Lloyd iterations from k-means++ starts, plain or with a minimum cluster size.

Both methods alternate two steps from K starting centres c_1..c_K until the assignment no longer
changes (or ``max_iter`` assignments were made):

1. *assignment*: D_ih = ||x_i - c_h||^2 for the n points and K centres, computed as
   ||x_i||^2 - 2 x_i.c_h + ||c_h||^2 through one BLAS product (O(n K d) flops), then
   - ``lloyd``: each point joins its nearest centre (Lloyd 1982);
   - ``sized``: the transportation LP of Bradley, Bennett and Demiriz (2000),

         min sum_ih D_ih T_ih  s.t.  sum_h T_ih = 1 (each point i),  sum_i T_ih >= tau (each cluster h),  T >= 0,

     whose constraint matrix is the incidence matrix of the bipartite graph points x clusters, so it
     is totally unimodular and every vertex is a 0/1 assignment (their Proposition 2.3): it is a
     minimum-cost flow from the points to the clusters. HiGHS's dual simplex solves it; one model of
     n K columns and n + K rows is built per clustering and only its costs change between
     iterations, so each solve starts from the previous optimal basis. The costs are divided by
     their mean first (the optimal assignment does not change; HiGHS's tolerances then act on
     numbers of order 1).
2. *update*: every centre moves to the mean of its points. A cluster left empty (``lloyd``, or
   ``sized`` with tau = 0) takes the point farthest from its centre, which leaves its former
   cluster (one point per empty cluster, farthest first), the relocation scikit-learn's ``KMeans``
   also makes.

**Starts** (k-means++, Arthur and Vassilvitskii 2007): the first centre is a point drawn uniformly,
each next one a point drawn with probability proportional to its squared distance to the nearest
centre chosen so far (D^2 sampling; uniformly among the points not yet chosen if every distance is
0). ``restarts`` independent starts are drawn from ``numpy.random.default_rng(seed)``, one after the
other, and the partition of least cost in the space clustered is kept. The original points and a
projection of them are clustered from the same seed: the same draws, applied to their own distances.

Statuses (:data:`calib.solvers.result.STATUSES`): ``optimal`` when the assignment of the kept
start stopped changing (a local optimum of the method, not a global one: k-means is NP-hard),
``stopped_on_iterations`` when a start reached ``max_iter`` (its partition is still returned), and
for ``sized`` the status of an assignment LP that did not reach its optimum (``stopped_on_time``,
``solver_failed``...), with no partition. A clustering that exceeds its time limit stops with
``stopped_on_time`` and no partition.

References: S. P. Lloyd, "Least squares quantization in PCM", IEEE Trans. Information Theory 28(2),
1982; D. Arthur and S. Vassilvitskii, "k-means++: the advantages of careful seeding", SODA 2007;
P. S. Bradley, K. P. Bennett and A. Demiriz, "Constrained k-means clustering", Microsoft Research
MSR-TR-2000-65, 2000.
"""

from __future__ import annotations

import time
from typing import Callable, Optional

import numpy as np

from calib.problems.clustering import ClusteringProblem, cluster_means, kmeans_cost
from calib.solvers.result import SolveResult


class Stopped(Exception):
    """An assignment step or the time budget ended the clustering: ``status`` and the solver's code and text."""

    def __init__(self, status: str, code: int, message: str):
        super().__init__(message)
        self.status, self.code, self.message = status, code, message


def squared_distances(points: np.ndarray, centres: np.ndarray) -> np.ndarray:
    """D of shape (n, K): D_ih = ||x_i - c_h||^2 (clipped at 0 against rounding).

    >>> squared_distances(np.array([[0.0, 0.0], [3.0, 4.0]]), np.array([[0.0, 0.0]])).ravel().tolist()
    [0.0, 25.0]
    """
    norms = np.einsum("ij,ij->i", points, points)
    return np.maximum(norms[:, None] - 2.0 * points @ centres.T + np.einsum("ij,ij->i", centres, centres)[None, :], 0.0)


def kmeans_plus_plus(points: np.ndarray, clusters: int, rng: np.random.Generator) -> np.ndarray:
    """Indices of K starting points by D^2 sampling (module docstring), shape (K,).

    >>> idx = kmeans_plus_plus(np.array([[0.0], [0.1], [10.0], [10.1]]), 2, np.random.default_rng(0))
    >>> sorted(i // 2 for i in idx.tolist())   # one start in each of the two far-apart pairs
    [0, 1]
    """
    n = points.shape[0]
    chosen = [int(rng.integers(n))]
    nearest = squared_distances(points, points[chosen])[:, 0]
    for _ in range(1, clusters):
        total = nearest.sum()
        if total > 0.0:
            pick = int(rng.choice(n, p=nearest / total))
        else:  # every point sits on a chosen one: any point not yet chosen
            pick = int(rng.choice(np.setdiff1d(np.arange(n), chosen)))
        chosen.append(pick)
        nearest = np.minimum(nearest, squared_distances(points, points[[pick]])[:, 0])
    return np.asarray(chosen, dtype=np.int64)


def updated_centres(points: np.ndarray, labels: np.ndarray, distances: np.ndarray) -> np.ndarray:
    """The means of the clusters, after each empty cluster took a point farthest from its centre
    (module docstring), shape (K, d); ``distances`` is the (n, K) matrix D that gave ``labels``.

    >>> x = np.array([[0.0], [1.0], [9.0]])
    >>> updated_centres(x, np.array([0, 0, 0]), np.array([[0.0, 4.0], [1.0, 1.0], [81.0, 49.0]])).ravel().tolist()
    [0.5, 9.0]
    """
    clusters = distances.shape[1]
    means, sizes = cluster_means(points, labels, clusters)
    empty = np.flatnonzero(sizes == 0)
    if empty.size == 0:
        return means
    sums, labels = means * sizes[:, None], labels.copy()
    own = distances[np.arange(points.shape[0]), labels]
    for cluster, point in zip(empty, np.argsort(-own, kind="stable")):
        sums[labels[point]] -= points[point]
        sizes[labels[point]] -= 1
        sums[cluster], sizes[cluster] = points[point], 1
    return sums / np.maximum(sizes, 1)[:, None]


def iterate(points: np.ndarray, centres: np.ndarray, assign: Callable[[np.ndarray], np.ndarray], max_iter: int,
            deadline: float) -> tuple[np.ndarray, int, bool]:
    """(labels, assignments made, converged) of the alternation of the module docstring from ``centres``.

    ``assign`` maps D (n, K) to labels (n,); ``deadline`` is a ``time.perf_counter()`` value.
    """
    labels: Optional[np.ndarray] = None
    for iteration in range(1, max_iter + 1):
        if time.perf_counter() > deadline:
            raise Stopped("stopped_on_time", 0, f"time limit reached after {iteration - 1} iterations")
        distances = squared_distances(points, centres)
        new = assign(distances)
        if labels is not None and np.array_equal(new, labels):
            return labels, iteration, True
        labels = new
        centres = updated_centres(points, labels, distances)
    return labels, max_iter, False


def nearest(distances: np.ndarray) -> np.ndarray:
    """Lloyd's assignment: each point to its nearest centre (the first on ties)."""
    return np.argmin(distances, axis=1)


class SizedAssignment:
    """The transportation LP of the module docstring for n points, K clusters and minimum size tau,
    built once in HiGHS; calling it with D (n, K) returns the optimal 0/1 assignment as labels."""

    def __init__(self, n_points: int, clusters: int, min_size: int, deadline: float, options: Optional[dict] = None):
        import highspy
        from calib.solvers.highs import new_highs

        self.shape, self.deadline = (n_points, clusters), deadline
        self.highs = new_highs({"solver": "simplex", **(options or {})})
        lp = highspy.HighsLp()
        columns = n_points * clusters
        lp.num_col_, lp.num_row_ = columns, n_points + clusters
        lp.col_cost_ = np.zeros(columns)
        lp.col_lower_, lp.col_upper_ = np.zeros(columns), np.full(columns, highspy.kHighsInf)
        lp.row_lower_ = np.concatenate([np.ones(n_points), np.full(clusters, float(min_size))])
        lp.row_upper_ = np.concatenate([np.ones(n_points), np.full(clusters, highspy.kHighsInf)])
        point, cluster = np.divmod(np.arange(columns), clusters)  # column j = i K + h
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = np.arange(0, 2 * columns + 1, 2, dtype=np.int32)
        lp.a_matrix_.index_ = np.column_stack([point, n_points + cluster]).ravel().astype(np.int32)
        lp.a_matrix_.value_ = np.ones(2 * columns)
        self.highs.passModel(lp)
        self.columns = np.arange(columns, dtype=np.int32)
        self.solves = 0

    def __call__(self, distances: np.ndarray) -> np.ndarray:
        from calib.solvers.highs import STATUS_TABLE

        remaining = self.deadline - time.perf_counter()
        if remaining <= 0:
            raise Stopped("stopped_on_time", 0, f"time limit reached after {self.solves} assignment LPs")
        self.highs.setOptionValue("time_limit", float(remaining))
        costs = distances.ravel()
        self.highs.changeColsCost(costs.size, self.columns, costs / max(float(costs.mean()), 1e-300))
        self.highs.run()
        self.solves += 1
        model_status = self.highs.getModelStatus()
        status = STATUS_TABLE.get(model_status, "solver_failed")
        if status != "optimal":
            raise Stopped(status, int(model_status), f"assignment LP {self.solves}: {self.highs.modelStatusToString(model_status)}")
        share = np.asarray(self.highs.getSolution().col_value).reshape(self.shape)
        return np.argmax(share, axis=1)


def cluster(problem: ClusteringProblem, points: np.ndarray, time_limit: float = 60.0,
            highs_options: Optional[dict] = None) -> SolveResult:
    """Cluster ``points`` (n, d') by ``problem``'s method, K, seed, restarts and minimum size.

    ``points`` are the problem's own or a projection of them; ``time_limit`` in seconds covers the
    whole clustering. The result's ``x`` holds the labels (as floats, shape (n,)), ``objective`` the
    cost of that partition on ``points``, ``iterations`` the assignments made over all starts.
    """
    start = time.perf_counter()
    deadline = start + float(time_limit)
    rng = np.random.default_rng(problem.seed)
    options = {"method": problem.method, "clusters": problem.clusters, "seed": problem.seed, "restarts": problem.restarts,
               "max_iter": problem.max_iter, "min_size": problem.min_size, "time_limit": float(time_limit)}
    solver = f"calib-{problem.method}"
    best, iterations, converged_all = None, 0, True
    try:
        assign = nearest if problem.method == "lloyd" else \
            SizedAssignment(points.shape[0], problem.clusters, problem.min_size, deadline, highs_options)
        for _ in range(problem.restarts):
            starts = points[kmeans_plus_plus(points, problem.clusters, rng)]
            labels, used, converged = iterate(points, starts, assign, problem.max_iter, deadline)
            iterations += used
            cost = kmeans_cost(points, labels, problem.clusters)
            if best is None or cost < best[0]:
                best, converged_all = (cost, labels), converged
    except Stopped as stop:
        return SolveResult(stop.status, solver, stop.code, stop.message, iterations=iterations,
                           seconds=time.perf_counter() - start, options=options)
    status = "optimal" if converged_all else "stopped_on_iterations"
    message = (f"assignment stable; {iterations} assignments over {problem.restarts} start(s)" if converged_all
               else f"the kept start reached the cap of {problem.max_iter} iterations")
    return SolveResult(status, solver, 0, message, objective=best[0], x=best[1].astype(float), iterations=iterations,
                       seconds=time.perf_counter() - start, options=options)
