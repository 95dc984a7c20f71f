"""A projected solve stops at its own caps (``projected_max_iters``, ``projected_time_limit_s``),
recorded as the solver's limit status, and the analysis counts it as a failure.

References: the status vocabulary of :mod:`calib.solvers.result` (HiGHS ``kIterationLimit``, SCS's
uncertified stop at ``max_iters``); the rule that a time or iteration limit is a failure is the
table's stated rule (common practice: a policy cannot wait for a solve that did not finish).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from calib import projectors
from calib.errors import InputError
from calib.reduce.base import projected_solver
from calib.reduce.lp import LPHandler
from calib.reduce.sdp import SDPHandler
from calib.verdicts.success import evaluate, make_predicate
import tomllib

from calib.sweep.spec import parse_spec
from reduce_helpers import SOLVER, instance


def _records(handler, problem, k, solver):
    original = handler.solve_original(problem, SOLVER)
    T = projectors.make("gaussian", k, handler.projected_dim(problem), [k, 3, 11])
    return original, handler.trial_records(problem, original, T, [handler.default_retrieval], solver)


def test_sdp_projected_solve_stops_at_its_iteration_cap_and_fails():
    sdp = instance("sdp-maxcut", {"nodes": 30}).problem
    original, (row,) = _records(SDPHandler, sdp, 10, {**SOLVER, "projected_max_iters": 25})
    assert original.ok and original.iterations > 25  # the original keeps its own limits
    assert row["proj_status"] == "stopped_on_iterations" and row["proj_iterations"] == 25
    frame = pd.DataFrame([{**row, "status": "ok", "kind": "sdp"}])
    assert not evaluate(frame, make_predicate("bound")).iloc[0]


def test_lp_projected_solve_stops_at_its_iteration_cap():
    lp = instance("lp-planted", {"rows": 60, "cols": 120}).problem
    _, (row,) = _records(LPHandler, lp, 40, {**SOLVER, "projected_max_iters": 3})
    assert row["proj_status"] == "stopped_on_iterations" and row["proj_iterations"] <= 3


def test_caps_replace_the_limits_of_the_projected_solve_only():
    solver = {"time_limit_s": 60.0, "highs": {"presolve": "off"}, "projected_time_limit_s": 2.5, "projected_max_iters": 7}
    capped = projected_solver(solver)
    assert capped["time_limit_s"] == 2.5 and capped["highs"]["presolve"] == "off"
    assert capped["highs"]["simplex_iteration_limit"] == capped["scs"]["max_iters"] == 7
    assert projected_solver({"time_limit_s": 60.0}) == {"time_limit_s": 60.0}  # nothing set, nothing changed


SPEC = """
[campaign]
name = "caps"
root_seed = 1
[[families]]
name = "lp-planted"
sizes = [{{rows = 20, cols = 40}}]
[sweep]
projectors = ["gaussian"]
k = [4]
[solver]
{solver}
"""


def test_spec_reads_the_caps_and_refuses_bad_values():
    spec = parse_spec(tomllib.loads(SPEC.format(solver="projected_time_limit_s = 5\nprojected_max_iters = 2000")))
    assert spec.solver["projected_time_limit_s"] == 5.0 and spec.solver["projected_max_iters"] == 2000
    assert "projected_max_iters" not in parse_spec(tomllib.loads(SPEC.format(solver="time_limit_s = 9"))).solver
    for bad, field in (("projected_max_iters = 0", "solver.projected_max_iters"),
                       ("projected_max_iters = 2.5", "solver.projected_max_iters"),
                       ("projected_time_limit_s = -1", "solver.projected_time_limit_s")):
        with pytest.raises(InputError) as caught:
            parse_spec(tomllib.loads(SPEC.format(solver=bad)))
        assert field in str(caught.value)
