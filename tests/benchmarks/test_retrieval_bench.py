"""Time of each retrieval on one fixed projected solve (LP, SDP) and of the point-set distortion.

Run with `pytest tests/benchmarks --benchmark-only`; skipped in normal runs.
"""

import numpy as np
import pytest

from calib import projectors
from calib.families import get
from calib.reduce import HANDLERS
from calib.reduce.base import Context
from calib.reduce.points import all_pair_squared_distances, distortion_summary

SOLVER = {"time_limit_s": 60.0}


def _context(family, params, k):
    fam = get(family)
    instance = fam.make(fam.resolve(params, family), 0, np.random.default_rng(0))
    handler = HANDLERS[instance.kind]
    problem = instance.problem
    reduced = handler.reduce(problem, projectors.make("gaussian", k, handler.projected_dim(problem), 1))
    projected = handler.solve_reduced(reduced, SOLVER)
    assert projected.ok
    return handler, Context(problem, handler.solve_original(problem, SOLVER), reduced, projected, SOLVER)


@pytest.mark.parametrize("retrieval", ["basis-lstsq", "alternating", "restricted-repair", "warm-start"])
def test_lp_retrieval_planted_240x480(benchmark, retrieval):
    handler, context = _context("lp-planted", {"rows": 240, "cols": 480, "cost": "nonnegative"}, 180)
    benchmark(handler.retrievals[retrieval], context)


@pytest.mark.parametrize("retrieval", ["affine", "affine-psd", "alternating"])
def test_sdp_retrieval_theta_30_nodes(benchmark, retrieval):
    handler, context = _context("sdp-theta", {"nodes": 30, "edge_prob": 0.2}, 60)
    benchmark(handler.retrievals[retrieval], context)


@pytest.mark.parametrize("n_points", [2000, 10_000])
def test_point_distortion_every_pair(benchmark, n_points):
    rng = np.random.default_rng(0)
    points = rng.standard_normal((n_points, 256))
    projected = points @ rng.standard_normal((256, 64)) / 8.0
    originals = all_pair_squared_distances(points)
    benchmark.pedantic(distortion_summary, args=(originals, projected), rounds=3)
