"""Clustering: k-means cost, Lloyd from k-means++ starts, the size-constrained assignment, the
clustering handler and families, against scikit-learn and scipy as references."""

from __future__ import annotations

import itertools
import json
import time

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import linear_sum_assignment
from sklearn.cluster import KMeans
from sklearn.metrics import adjusted_rand_score

from calib import projectors
from calib.cli import main
from calib.clustering import ClusteringProblem, disagreement, kmeans_cost
from calib.errors import InputError
from calib.families import get
from calib.families.clustering import DIGITS_SHAPE, digits, gaussian_mixture
from calib.reduce import HANDLERS
from calib.solvers.kmeans import SizedAssignment, cluster, iterate, nearest, squared_distances
from calib.verdicts.success import PRESETS, evaluate, make_predicate

FOREVER = 1e9  # a deadline no test reaches (time.perf_counter() seconds)


def _mixture(n=300, d=20, K=4, separation=0.5, seed=0):
    return gaussian_mixture(n, d, K, separation, np.random.default_rng(seed))


def test_cost_of_a_known_partition_is_sklearn_inertia():
    # scikit-learn KMeans (reference implementation): started from the means of the true partition of
    # a well-separated mixture it keeps that partition, and inertia_ is its within-cluster sum of squares
    points, labels, _ = _mixture(separation=3.0)
    means = np.array([points[labels == h].mean(axis=0) for h in range(4)])
    fitted = KMeans(4, init=means, n_init=1).fit(points)
    assert adjusted_rand_score(labels, fitted.labels_) == 1.0
    assert kmeans_cost(points, labels, 4) == pytest.approx(fitted.inertia_, rel=1e-10)
    # and on an overlapping mixture, for whatever partition scikit-learn ends at (tol = 0: strict
    # convergence, so its centres are the means of its labels)
    points, _, _ = _mixture(separation=0.3, seed=1)
    fitted = KMeans(4, n_init=1, tol=0.0, random_state=0).fit(points)
    assert kmeans_cost(points, fitted.labels_, 4) == pytest.approx(fitted.inertia_, rel=1e-10)


def test_lloyd_from_given_starts_follows_sklearn_step_for_step():
    # scikit-learn KMeans(algorithm="lloyd", tol=0) from the same starting centres (reference):
    # same labels, same number of iterations, same cost
    points, _, _ = _mixture(n=500, separation=0.25, seed=2)
    starts = points[np.random.default_rng(3).choice(500, 4, replace=False)]
    fitted = KMeans(4, init=starts, n_init=1, algorithm="lloyd", tol=0.0, max_iter=300).fit(points)
    labels, iterations, converged = iterate(points, starts.copy(), nearest, 300, FOREVER)
    assert converged and iterations == fitted.n_iter_
    np.testing.assert_array_equal(labels, fitted.labels_)
    assert kmeans_cost(points, labels, 4) == pytest.approx(fitted.inertia_, rel=1e-10)


def test_kmeanspp_lloyd_with_restarts_reaches_sklearns_partition_on_a_separated_mixture():
    # scikit-learn KMeans with 10 k-means++ starts (reference) and ours with 5 find the same partition
    points, labels, _ = _mixture(n=400, d=30, K=5, separation=1.0, seed=4)
    ours = cluster(ClusteringProblem(points, 5, "lloyd", seed=9, restarts=5), points)
    theirs = KMeans(5, n_init=10, random_state=0).fit(points)
    assert ours.status == "optimal"
    assert adjusted_rand_score(theirs.labels_, ours.x.astype(int)) == 1.0 == adjusted_rand_score(labels, ours.x.astype(int))
    assert ours.objective == pytest.approx(theirs.inertia_, rel=1e-10)


def test_sized_assignment_on_equal_sizes_is_scipys_linear_assignment():
    # Equal sizes n/K: the transportation LP is the assignment problem of the n points to n slots,
    # each centre repeated n/K times, solved by scipy's linear_sum_assignment (reference)
    rng = np.random.default_rng(5)
    points, centres = rng.standard_normal((60, 3)), rng.standard_normal((4, 3)) * 0.3
    distances = squared_distances(points, centres)
    labels = SizedAssignment(60, 4, 15, FOREVER)(distances)
    slotted = np.repeat(distances, 15, axis=1)
    rows, slots = linear_sum_assignment(slotted)
    assert np.bincount(labels, minlength=4).tolist() == [15, 15, 15, 15]
    assert distances[np.arange(60), labels].sum() == pytest.approx(slotted[rows, slots].sum(), rel=1e-9)
    # a slack constraint leaves Lloyd's nearest-centre assignment (no ties with continuous data)
    np.testing.assert_array_equal(SizedAssignment(60, 4, 0, FOREVER)(distances), nearest(distances))


def test_sized_clustering_keeps_every_minimum_size():
    # Bradley, Bennett and Demiriz (2000): every cluster holds at least tau points, also on a
    # mixture whose components are unequal (40 / 160 points)
    points = np.vstack([np.random.default_rng(6).standard_normal((40, 5)) + 4.0,
                        np.random.default_rng(7).standard_normal((160, 5))])
    result = cluster(ClusteringProblem(points, 2, "sized", seed=1, min_size=90), points)
    assert result.status == "optimal" and np.bincount(result.x.astype(int)).min() >= 90


def test_disagreement_is_the_best_relabelling():
    # against a brute force over all relabellings (K = 4: 24 permutations)
    rng = np.random.default_rng(8)
    first = rng.integers(0, 4, 50)
    second = np.array([2, 0, 3, 1])[first]
    second[:3] = (second[:3] + 1) % 4  # three points moved
    brute = min(np.mean(np.array(sigma)[second] != first) for sigma in itertools.permutations(range(4)))
    assert disagreement(first, second) == pytest.approx(brute) and brute == pytest.approx(3 / 50)


def test_projected_partition_of_a_well_separated_mixture_is_the_original_one():
    # scikit-learn's adjusted_rand_score (reference) is 1 between the original and the projected partition
    family = get("cluster-mixture")
    params = family.resolve({"points": 200, "dim": 100, "clusters": 4, "separation": 3.0}, "test")
    problem = family.make(params, 0, np.random.default_rng(10)).problem
    handler = HANDLERS["clustering"]
    original = handler.solve_original(problem, {})
    for k in (10, 30):
        T = projectors.make("gaussian", k, 100, np.random.default_rng([k, 1]))
        (rec,) = handler.trial_records(problem, original, T, ["partition"], {})
        projected = cluster(problem, np.asarray(T.apply(problem.columns)).T)
        assert adjusted_rand_score(original.x, projected.x) == 1.0
        assert rec["cluster_disagreement"] == 0.0 and rec["cluster_cost_ratio"] == pytest.approx(1.0, rel=1e-12)
        assert rec["t_total"] == pytest.approx(rec["t_sketch"] + rec["t_solve_proj"] + rec["t_retrieve"])


def test_time_limit_stops_a_clustering_without_a_partition():
    points, _, _ = _mixture()
    result = cluster(ClusteringProblem(points, 4, "sized", min_size=10), points, time_limit=0.0)
    assert result.status == "stopped_on_time" and result.x is None
    (rec,) = HANDLERS["clustering"].trial_records(
        ClusteringProblem(points, 4), cluster(ClusteringProblem(points, 4), points),
        projectors.make("gaussian", 5, 20, 0), ["partition"], {"projected_time_limit_s": 1e-12, "time_limit_s": 10})
    assert rec["proj_status"] == "stopped_on_time" and rec["cluster_cost_ratio"] is None


def test_clustering_preset_is_one_sided_on_the_cost_ratio():
    rows = pd.DataFrame({"status": ["ok"] * 5, "kind": ["clustering"] * 5, "orig_status": ["optimal"] * 5,
                         "proj_status": ["optimal"] * 4 + ["stopped_on_time"],
                         "cluster_cost_ratio": [0.97, 1.04, 1.06, 1.0, None]})
    assert evaluate(rows, PRESETS["clustering"]).tolist() == [True, True, False, True, False]
    assert evaluate(rows, make_predicate("clustering", cost=0.1)).tolist() == [True, True, True, True, False]
    assert "cost" in PRESETS["clustering"].as_dict() and "cost" not in PRESETS["bound"].as_dict()


def test_families_are_deterministic_and_checked():
    family = get("cluster-mixture")
    params = family.resolve({"points": 50, "dim": 6, "clusters": 3}, "test")
    one, two = (family.make(params, 0, np.random.default_rng(3)).problem for _ in range(2))
    assert one.points.tobytes() == two.points.tobytes() and one.seed == two.seed
    assert family.make(params, 0, np.random.default_rng(4)).problem.seed != one.seed
    with pytest.raises(InputError, match="min_share"):
        family.resolve({"points": 50, "dim": 6, "clusters": 3, "method": "sized"}, "test")
    with pytest.raises(InputError, match="min_share"):
        family.resolve({"points": 50, "dim": 6, "clusters": 3, "min_share": 0.5}, "test")
    with pytest.raises(InputError, match="clusters"):
        family.resolve({"points": 5, "dim": 6, "clusters": 6}, "test")


def test_digits_are_scikit_learns_bundled_digits():
    # sklearn.datasets.load_digits: 1,797 images of 8 x 8 pixels, grey levels 0..16, ten digits
    # (scikit-learn's documentation of the data set)
    points, labels = digits()
    assert points.shape == DIGITS_SHAPE == (1797, 64)
    assert points.min() == 0.0 and points.max() == 16.0 and sorted(set(labels.tolist())) == list(range(10))
    family = get("cluster-digits")
    problem = family.make(family.resolve({"clusters": 10, "method": "sized", "min_share": 0.5}, "t"), 0,
                          np.random.default_rng(0)).problem
    assert problem.min_size == 89 and family.n_points({"clusters": 10}) == 10 and family.projected_dim({}) == 64


SPEC = """
[campaign]
name = "tiny-clusters"
root_seed = 5
replicates = 6

[[families]]
name = "cluster-mixture"
sizes = [{points = 60, dim = 40, clusters = 3}, {points = 60, dim = 40, clusters = 6}]
instances = 3
params = {separation = 3.0, restarts = 4}

[sweep]
projectors = ["gaussian"]
k = [1, 24]
"""


def test_small_campaign_gives_a_table_that_lookup_answers(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(SPEC)
    assert main(["run", str(spec), "--out", str(tmp_path), "--quiet"]) == 0
    table = tmp_path / "t.json"
    assert main(["tables", str(tmp_path / "tiny-clusters.sqlite"), "--preset", "clustering", "--tau", "0.05", "--delta", "0.2",
                 "--json", str(table)]) == 0
    written = json.loads(table.read_text())
    assert written["theory"]["rules"] == ["cemmp-clustering", "mmr-clustering"]
    entries = written["analyses"][0]["entries"]
    assert [entry["n_points"] for entry in entries] == [3, 6]  # the clustering n is K
    for entry in entries:
        rates = [point["rate"] for point in entry["grid"]]
        assert rates[1] == 1.0 > rates[0]  # one dimension merges clusters, 24 keep the separated mixture
        assert entry["safe_k"] == 24 and entry["grid"][1]["lower_bound"] >= 0.8 and entry["theory"]["eps"] == pytest.approx(0.05 / 2.05)
        eps, clusters = entry["theory"]["eps"], entry["n_points"]
        assert entry["theory"]["bounds"]["mmr-clustering"]["k"] == int(np.ceil(np.log(clusters / eps) / eps**2))
        assert entry["theory"]["bounds"]["cemmp-clustering"]["k"] == int(np.ceil(clusters / eps**2))
    (law,) = written["analyses"][0]["laws"]
    assert set(law["theory"]["rules"]) == {"mmr-clustering"}  # the one bound logarithmic in K
    capsys.readouterr()
    assert main(["lookup", str(table), "--family", "cluster-mixture", "--size", "points=60,dim=40,clusters=3",
                 "--projector", "gaussian", "--scope", "instances", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["safe_k"] == 24


def test_bounds_command_prints_the_clustering_bounds(capsys):
    # ceil(ln(10 / 0.1) / 0.1^2) = 461 and ceil(10 / 0.1^2) = 1000 (the formulas of calib.theory)
    assert main(["bounds", "--clusters", "10", "--eps", "0.1"]) == 0
    text = capsys.readouterr().out
    assert "K = 10 clusters" in text and "constant unstated" in text
    rows = {line.split()[0]: line.split()[1] for line in text.splitlines() if line.startswith(("mmr", "cemmp"))}
    assert rows == {"mmr-clustering": "461", "cemmp-clustering": "1000"}
