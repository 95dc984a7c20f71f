"""Solve methods, the fair baseline of an original, and the policy answer per cell."""

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy import stats

from calib.analysis.policy import NO_SAVING, entry_block, policy_k
from calib.errors import InputError
from calib.reduce.lp import LPHandler
from calib.reduce.qp import QPHandler
from calib.solvers.methods import auto_lp_method, check_methods, check_projected, race
from calib.solvers.result import SolveResult
from calib.sweep.spec import load_spec
from calib.verdicts.saferule import Confidence
from reduce_helpers import SOLVER, instance


def _result(status, seconds, objective=1.0):
    return SolveResult(status, "test", 0, status, objective=objective, seconds=seconds)


def test_race_takes_the_fastest_method_that_reaches_the_reference_verdict():
    # A method that stops without a verdict (time limit) is never the baseline, however fast it was;
    # the reference is the first configured method with a verdict, whatever the times (reproducible metrics).
    results = {"simplex": _result("optimal", 3.0), "ipm": _result("stopped_on_time", 0.1)}
    baseline = race(results.get, ("simplex", "ipm"))
    assert (baseline.reference, baseline.fastest, baseline.seconds) == ("simplex", "simplex", 3.0)
    results["ipm"] = _result("optimal", 0.5)
    baseline = race(results.get, ("simplex", "ipm"))
    assert (baseline.reference, baseline.fastest, baseline.seconds) == ("simplex", "ipm", 0.5)
    assert set(baseline.summary()) == {"simplex", "ipm"} and baseline.summary()["ipm"]["message"] == "optimal"
    infeasible = {"simplex": _result("stopped_on_time", 9.0), "ipm": _result("infeasible", 2.0, float("nan"))}
    baseline = race(infeasible.get, ("simplex", "ipm"))
    assert (baseline.reference, baseline.fastest) == ("ipm", "ipm")


def test_lp_baseline_records_both_methods_on_one_optimum():
    # Both methods must reach the same optimum (HiGHS, to 1e-7 relative, as on Netlib in test_lp_core).
    lp = instance("lp-planted", {"rows": 20, "cols": 40}).problem
    baseline = LPHandler.solve_baseline(lp, SOLVER)
    assert set(baseline.results) == {"simplex", "ipm"} and baseline.reference == "simplex"
    simplex, ipm = baseline.results["simplex"], baseline.results["ipm"]
    assert ipm.options["run_crossover"] == "off" and simplex.options["solver"] == "simplex"
    assert ipm.objective == pytest.approx(simplex.objective, rel=1e-7)
    assert baseline.seconds == min(simplex.seconds, ipm.seconds)


def test_qp_with_a_ball_skips_highs_and_keeps_scs():
    qp = instance("qp-random", {"vars": 8, "rows": 4, "radius": 1.0}).problem
    baseline = QPHandler.solve_baseline(qp, SOLVER)
    assert list(baseline.results) == ["scs"] and baseline.fastest == "scs"


def test_auto_rule_uses_interior_point_on_large_dense_projected_lps_only():
    # data-only rule (no timing): a 400 x 1000 dense matrix (4e5 nonzeros) goes to ipm, sparse or small ones to simplex
    assert auto_lp_method(np.ones((400, 1000))) == "ipm"
    assert auto_lp_method(np.ones((40, 100))) == "simplex"
    assert auto_lp_method(sp.random(400, 4000, density=0.01, format="csr", random_state=0)) == "simplex"


def test_projected_method_follows_the_spec_and_is_recorded():
    lp = instance("lp-planted", {"rows": 20, "cols": 40}).problem
    from calib import projectors

    original = LPHandler.solve_original(lp, SOLVER)
    for chosen in ("ipm", "simplex"):
        solver = {**SOLVER, "projected": {"lp": chosen}}
        rows = LPHandler.trial_records(lp, original, projectors.make("gaussian", 10, 20, 3), ["basis-lstsq", "alternating"],
                                       solver)
        assert {row["proj_method"] for row in rows} == {chosen}
        assert all(row["t_total"] >= row["t_solve_proj"] for row in rows)


@pytest.mark.parametrize("table, field", [
    ({"lp": ["simplex", "barrier"]}, "solver.methods.lp"),
    ({"lp": []}, "solver.methods.lp"),
    ({"lp": ["ipm", "ipm"]}, "solver.methods.lp"),
    ({"points": ["scs"]}, "solver.methods.points"),
])
def test_bad_method_tables_name_the_field(table, field):
    with pytest.raises(InputError) as caught:
        check_methods(table, "solver.methods")
    assert caught.value.where == field


def test_spec_reads_methods_projected_and_scs_settings(tmp_path):
    spec = tmp_path / "s.toml"
    spec.write_text('[campaign]\nname = "m"\nroot_seed = 1\nreplicates = 1\n[[families]]\nname = "lp-planted"\n'
                    'sizes = [{rows = 10, cols = 20}]\n[sweep]\nprojectors = ["gaussian"]\nk = [4]\n'
                    '[solver]\nmethods = {lp = ["ipm", "simplex"]}\nprojected = {lp = "ipm"}\nscs = {eps_abs = 1e-7}\n')
    solver = load_spec(spec).solver
    assert solver["methods"] == {"lp": ["ipm", "simplex"]} and solver["projected"] == {"lp": "ipm"}
    assert solver["scs"] == {"eps_abs": 1e-7}
    with pytest.raises(InputError):
        check_projected({"sdp": "simplex"}, "solver.projected")


def _cell(successes, times, trials=10, baseline=1.0):
    """Raw rows of one cell (the columns of calib.analysis.policy.row_columns): per k, ``trials`` rows of
    which the first ``successes`` are policy successes, all with end-to-end time ``times[k]``."""
    rows = [{"k": k, "kind": "lp", "policy_success": int(i < count), "t_total_s": time, "t_baseline_s": baseline}
            for k, count, time in zip([10, 20, 40], successes, times) for i in range(trials)]
    return pd.DataFrame(rows)


def test_policy_k_is_the_fastest_k_whose_bound_meets_the_target():
    # One-sided Clopper-Pearson at 95%: 10/10 gives 0.05^(1/10) = 0.741 (scipy.stats.beta reference), so a
    # target of 0.7 is met by 10/10 only; 9/10 gives beta.ppf(0.05, 9, 2) = 0.606.
    confidence = Confidence(delta=0.3, level=0.95)
    assert stats.beta.ppf(0.05, 10, 1) == pytest.approx(0.05 ** 0.1) and stats.beta.ppf(0.05, 10, 1) > 0.7
    assert stats.beta.ppf(0.05, 9, 2) < 0.7
    block = entry_block(_cell([9, 10, 10], [0.2, 0.6, 0.4]), confidence)["policy"]
    assert block["k"] == 40 and block["time_median_s"] == 0.4 and block["speedup"] == 2.5
    assert [point["passes"] for point in block["grid"]] == [False, True, True]
    none = entry_block(_cell([9, 9, 0], [0.2, 0.3, 2.0]), confidence)["policy"]
    assert none["k"] is None and none["answer"] == NO_SAVING
    assert policy_k([1, 2], [True, True], [0.3, 0.3]) == (1, 0)  # ties: the smaller k


def test_policy_counts_an_exact_retrieval_that_saves_time():
    # A warm start is a failure under the time-free usable preset but a policy success when it saves time.
    from calib.analysis.policy import row_columns
    from calib.metrics import record
    from calib.verdicts.success import PRESETS

    base = dict(orig_status="optimal", proj_status="optimal", obj_error=0.0, feas_error=0.0, sign_violation=0.0,
                exact=True, t_baseline=2.0, iterations_saved=5)
    rows = pd.DataFrame([{**record(**base, t_total=1.0), "status": "ok", "kind": "lp"},
                         {**record(**base, t_total=3.0), "status": "ok", "kind": "lp"}])
    assert row_columns(rows, PRESETS["usable"])["policy_success"].tolist() == [1, 0]
