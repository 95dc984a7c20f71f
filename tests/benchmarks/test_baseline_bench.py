"""The fair baseline picks the faster method: each LP method timed on the same original, and the race.

Run with `make bench` (pytest-benchmark, skipped in normal runs). On the quantile-regression LP the
interior-point method is expected to beat dual simplex by a wide margin (20,000 observations: 23-25 s
against 1.4-1.7 s measured on a two-core machine); the race must then name ``ipm`` as the baseline and
its time must be the smaller of the two.
"""

import numpy as np
import pytest

from calib.families import get
from calib.reduce.lp import LPHandler
from calib.solvers.highs import solve_lp

SOLVER = {"time_limit_s": 120.0}


def _quantile(rows: int):
    family = get("lp-quantile")
    return family.make(family.resolve({"rows": rows, "features": 5}, "bench"), 0, np.random.default_rng(0)).problem


@pytest.mark.parametrize("method", ["simplex", "ipm"])
def test_quantile_original_by_method(benchmark, method):
    lp = _quantile(4000)
    result = benchmark.pedantic(solve_lp, args=(lp,), kwargs={"method": method, "need_basis": False}, rounds=2, iterations=1)
    assert result.ok


def test_baseline_picks_the_faster_method(benchmark):
    lp = _quantile(4000)
    baseline = benchmark.pedantic(LPHandler.solve_baseline, args=(lp, SOLVER), rounds=1, iterations=1)
    simplex, ipm = baseline.results["simplex"], baseline.results["ipm"]
    assert baseline.seconds == min(simplex.seconds, ipm.seconds)
    assert baseline.fastest == ("ipm" if ipm.seconds < simplex.seconds else "simplex")
    assert ipm.objective == pytest.approx(simplex.objective, rel=1e-7)
    benchmark.extra_info.update({name: r.seconds for name, r in baseline.results.items()} | {"fastest": baseline.fastest})
