"""Solve times of the SCS SDP adapter and the two QP adapters on mid-sized family instances.

Run with `pytest tests/benchmarks --benchmark-only`; skipped in normal runs.
"""

import numpy as np
import pytest

from calib.families import get
from calib.solvers.qp import solve_qp_highs, solve_qp_scs
from calib.solvers.scs_sdp import solve_sdp


def _problem(name, **params):
    family = get(name)
    return family.make(family.resolve(params, name), 0, np.random.default_rng(0)).problem


@pytest.mark.parametrize("order, constraints", [(20, 60), (40, 300)])
def test_scs_planted_sdp(benchmark, order, constraints):
    sdp = _problem("sdp-planted", order=order, constraints=constraints)
    result = benchmark(solve_sdp, sdp)
    assert result.status == "optimal"


def test_scs_maxcut_sdp_100_nodes(benchmark):
    sdp = _problem("sdp-maxcut", nodes=100, edge_prob=0.1)
    assert benchmark(solve_sdp, sdp).status == "optimal"


@pytest.mark.parametrize("solve", [solve_qp_highs, solve_qp_scs], ids=["highs", "scs"])
def test_portfolio_qp_300_assets(benchmark, solve):
    qp = _problem("qp-portfolio", assets=300, sectors=10, factors=5)
    assert benchmark(solve, qp).status == "optimal"
