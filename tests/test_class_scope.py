"""The class scope of a safe k: its parts against scipy, and the whole calibrated by simulation.

The simulation (tests/class_simulation.py) draws campaigns from a random-intercept logistic model
with instance heterogeneity and scores the class safe k and the k50 interval that
calib.analysis.cells.cell_stats (the function the tables call) reports.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from calib.analysis import bounds
from calib.analysis.cells import cell_stats
from calib.verdicts.scope import (Anova, cell_counts, class_lower_bound, instances_needed, pooled_anova,
                                  refusal)
from calib.analysis.tables import build_analysis, class_law
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import make_predicate
from class_simulation import GRID, binary_icc, score_design

CAMPAIGNS = 500
SEED = 11


# ----- the parts -----------------------------------------------------------------------------

def test_instances_needed_matches_the_exact_binomial_bound():
    # Reference: scipy.stats.binomtest exact (Clopper-Pearson) interval; a one-sided 95% bound is the
    # lower end of the two-sided 90% interval. n of n successes certify 0.9 from n = 29 on.
    def certifies(n):
        return stats.binomtest(n, n).proportion_ci(confidence_level=0.90, method="exact").low >= 0.9

    assert instances_needed(0.9, 0.95) == 29
    assert certifies(29) and not certifies(28)
    assert "29 are needed" in refusal(3, 0.9, 0.95) and refusal(29, 0.9, 0.95) == ""


def test_every_instance_deciding_alone_gives_the_binomial_on_instances():
    # When rho_U = 1 the class bound is Clopper-Pearson on instances (Rao & Scott 1992 with the design
    # effect equal to the replicates); reference: scipy.stats.binomtest exact interval, as above.
    for passing, instances in ((29, 29), (27, 30), (40, 45)):
        expected = stats.binomtest(passing, instances).proportion_ci(confidence_level=0.90, method="exact").low
        assert float(class_lower_bound(passing * 10, instances * 10, 10.0, 1.0, 0.95)) == pytest.approx(expected, rel=1e-9)
    # instances that each pass or fail all their replicates: MSW = 0, so rho_U = 1
    k = np.repeat([8, 16], 30 * 5)
    instance = np.tile(np.repeat(np.arange(30), 5), 2)
    success = np.where(k == 16, 1, (instance < 20).astype(int))
    result = cell_stats(k, instance, success, 0.9, 0.95)
    assert result.klass.rho_upper == 1.0
    assert result.class_safe_k == 16 and result.safe_k == 16
    assert result.klass.effective_trials.tolist() == pytest.approx([30.0, 30.0])


def test_anova_f_matches_scipy_one_way_anova():
    # Reference: scipy.stats.f_oneway on the 0/1 outcomes of each instance at one k gives F = MSB / MSW.
    rng = np.random.default_rng([3, 11])
    rates = rng.uniform(0.3, 0.9, 8)
    outcomes = [(rng.random(6) < rate).astype(float) for rate in rates]
    k = np.full(48, 10)
    instance = np.repeat(np.arange(8), 6)
    anova = pooled_anova(cell_counts(k, instance, np.concatenate(outcomes)))
    f_value = (anova.ss_between / anova.df_between) / (anova.ss_within / anova.df_within)
    assert f_value == pytest.approx(stats.f_oneway(*outcomes).statistic, rel=1e-9)
    assert (anova.df_between, anova.df_within, anova.n0) == (7, 40, 6.0)


def test_icc_upper_limit_is_searles_interval():
    # Searle (1971), Section 9.7: with F_low the (1 - confidence) quantile of F(groups - 1, df_within)
    # (scipy.stats.f), rho_U = (F / F_low - 1) / (F / F_low + n0 - 1); it covers the point estimate.
    anova = Anova(ss_between=6.0, ss_within=30.0, df_between=9, df_within=90, n0=10.0, groups=10)
    ratio = (6.0 / 9) / (30.0 / 90) / stats.f.ppf(0.05, 9, 90)
    assert anova.rho_upper(0.95) == pytest.approx((ratio - 1) / (ratio + 9), rel=1e-12)
    assert anova.rho_upper(0.95) >= anova.rho()


def test_one_replicate_makes_the_class_bound_the_pooled_bound():
    # 30 instances x 1 replicate: design effect 1, so the class bound is Clopper-Pearson on the 30
    # independent instances (scipy.stats.binomtest exact interval).
    rng = np.random.default_rng([30, 1, 11])
    k = np.repeat(GRID[:6], 30)
    instance = np.tile(np.arange(30), 6)
    success = (rng.random(k.size) < 0.95).astype(int)
    result = cell_stats(k, instance, success, 0.9, 0.95)
    assert result.klass.lower == pytest.approx(result.lower, rel=1e-12)
    hits = int(result.successes[0])
    assert result.lower[0] == pytest.approx(
        stats.binomtest(hits, 30).proportion_ci(confidence_level=0.90, method="exact").low, rel=1e-9)


# ----- the calibration ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def heterogeneous():
    return {design: score_design(*design, CAMPAIGNS, SEED).rates() for design in ((3, 10), (10, 3), (30, 1))}


def test_simulated_campaigns_have_the_stated_heterogeneity():
    assert binary_icc() == pytest.approx(0.2, abs=0.01)


@pytest.mark.parametrize("design", [(3, 10), (10, 3), (30, 1)])
def test_class_scope_false_claims_stay_near_the_nominal_rate(heterogeneous, design):
    # Nominal 5%: with 500 campaigns the estimated rate has a binomial sd of at most sqrt(.05 .95 / 500)
    # = 1%, so 7% is the nominal rate plus two of them.
    assert heterogeneous[design]["false_after"] <= 0.07


@pytest.mark.parametrize("design", [(10, 3), (30, 1)])
def test_class_k50_interval_covers_the_class_k50(heterogeneous, design):
    # Nominal 95% two-sided; 90% leaves five binomial sd (1% each at 500 campaigns) for the
    # small-sample bias of cluster-robust intervals with 10 clusters (Cameron & Miller 2015).
    assert heterogeneous[design]["cover_after"] >= 0.90


def test_three_instances_never_claim_the_class(heterogeneous):
    # 3 instances are below the 29 the honest floor needs; the class answer says so instead.
    assert heterogeneous[(3, 10)]["claims_after"] == 0.0


@pytest.mark.parametrize("design", [(30, 1), (30, 10)])
def test_without_heterogeneity_the_class_answer_is_the_pooled_answer(design):
    # Designs where a class claim is possible at all (30 >= 29 instances): with identical instances the
    # class safe k lies within one grid step of the pooled rule in at least 90% of campaigns.
    rates = score_design(*design, CAMPAIGNS, SEED, sigma=0.0).rates()
    assert rates["near_pooled"] >= 0.90 and rates["claims_after"] >= 0.90


# ----- solver errors, censoring, bounds at delta -------------------------------------------------

def _rows(proj_status: list[str], success_gap: list[float], k: list[int]) -> pd.DataFrame:
    count = len(k)
    return pd.DataFrame({
        "family": "lp-random", "size": "rows=10,cols=20", "params": "{}", "class_params": "{}", "projector": "gaussian",
        "retrieval": "basis-lstsq", "k": k, "k_label": "", "kind": "lp", "status": "ok", "projected_dim": 10,
        "n_points": 21, "instance_id": [f"i{index % 3}" for index in range(count)], "orig_status": "optimal",
        "proj_status": proj_status, "proj_gap": success_gap, "obj_error": np.nan, "feas_error": np.nan,
        "sign_violation": np.nan, "distortion_max": np.nan})


def test_a_solver_error_lands_in_its_own_column_not_in_the_rate():
    # 30 trials at k = 4, all within the gap but two whose projected solve ended in a solver error.
    status = ["optimal"] * 28 + ["solver_failed"] * 2
    rows = _rows(status, [0.01] * 28 + [np.nan] * 2, [4] * 30)
    excluded = build_analysis(rows, make_predicate("bound"), Confidence())
    (point,) = excluded["entries"][0]["grid"]
    assert (point["trials"], point["successes"], point["solver_errors"]) == (28, 28, 2)
    assert excluded["entries"][0]["solver_errors"] == 2
    strict = build_analysis(rows, make_predicate("bound"), Confidence(), solver_errors="fail")
    (point,) = strict["entries"][0]["grid"]
    assert (point["trials"], point["successes"], point["solver_errors"]) == (30, 28, 2)


def _entry(size: str, n: int, m: int, safe_k, reason: str = "", class_k=None, k50=None) -> dict:
    return {"family": "f", "class_params": {}, "projector": "gaussian", "retrieval": "r", "kind": "lp", "size": size,
            "n_points": n, "projected_dim": m, "safe_k": safe_k, "safe_k_reason": reason,
            "class": {"safe_k": class_k, "reason": "" if class_k else "3 instances cannot certify"},
            "transition": {"k50": k50, "reason": "" if k50 else "no fit"},
            "theory": {"eps": None, "eps_source": "", "failure": 0.1}}


def test_censored_sizes_are_shown_but_not_fitted():
    # A safe k equal to m (no reduction) and a size without a safe k are censored: the law is the
    # line through the two uncensored sizes only, k = a + C ln n (exact for two points).
    entries = [_entry("a", 100, 200, 20, k50=10.0), _entry("b", 1000, 300, 30, k50=15.0),
               _entry("c", 10000, 40, 40, k50=20.0), _entry("d", 100000, 500, None, "no swept k reaches the target")]
    law = class_law(entries)
    fit = law["safe_k_law"]
    assert fit["censored"] == 2
    # (the table keeps 6 significant digits)
    assert fit["C"] == pytest.approx(10 / math.log(10), rel=1e-5)
    assert fit["a"] == pytest.approx(20 - 10 / math.log(10) * math.log(100), rel=1e-5)
    assert [point["censored"] for point in fit["points"]] == [False, False, True, True]
    assert "no reduction" in fit["points"][2]["censoring"]
    assert law["class_safe_k_law"]["a"] is None and law["class_safe_k_law"]["censored"] == 4
    only_one = class_law(entries[1:])
    assert only_one["safe_k_law"]["a"] is None and "censored" in only_one["safe_k_law"]["reason"]


@pytest.mark.parametrize("n, eps, delta", [(1000, 0.5, 0.1), (61, 0.2, 0.05), (5000, 0.3, 0.01)])
def test_each_bound_is_taken_at_the_tables_delta(n, eps, delta):
    c = eps**2 / 2 - eps**3 / 3
    at = bounds.bound_k(n, eps, delta)
    # Achlioptas (2003), Theorem 1.1 with n^-beta = delta: k = (4 + 2 beta) ln n / c
    beta = math.log(1 / delta) / math.log(n)
    assert at["achlioptas"] == {"k": math.ceil((4 + 2 * beta) * math.log(n) / c - 1e-9), "failure": delta}
    # Dasgupta & Gupta (2003), proof of Theorem 2.1: union of 2 exp(-k c / 2) over n(n-1)/2 pairs <= delta
    assert at["dasgupta-gupta"] == {"k": math.ceil(2 * math.log(n * (n - 1) / delta) / c), "failure": delta}
    # exact chi-square pair tail (scipy.stats.chi2) with the union bound: the smallest k that holds
    k = at["chi2-union"]["k"]

    def union(k):
        return n * (n - 1) / 2 * (stats.chi2.cdf(k * (1 - eps), k) + stats.chi2.sf(k * (1 + eps), k))

    assert union(k) <= delta < union(k - 1) and at["chi2-union"]["failure"] == delta
    # bounds that state no failure probability are shown as published, marked so
    assert at["frankl-maehara"]["failure"] is None and at["ln-over-eps2"]["failure"] is None


def test_class_answer_is_in_the_table_json():
    rows = _rows(["optimal"] * 30, [0.01] * 30, [4] * 30)
    entry = build_analysis(rows, make_predicate("bound"), Confidence())["entries"][0]
    assert entry["instances"] == 3 and entry["safe_k"] == 4 and entry["class"]["safe_k"] is None
    assert entry["class"]["reason"].startswith("3 instances cannot certify 90% at 95% confidence")
    json.dumps(entry, allow_nan=False)
    # when no k passes even for the instances measured, more instances would not help: the data says why
    failing = build_analysis(_rows(["optimal"] * 30, [0.5] * 30, [4] * 30), make_predicate("bound"), Confidence())
    assert failing["entries"][0]["class"]["reason"] == "no swept k reaches the target, already for the instances measured"


# ----- design advice before spending -----------------------------------------------------------

@pytest.mark.parametrize("instances, replicates", [(3, 10), (10, 3), (30, 1), (10, 2), (1, 29), (28, 1)])
def test_design_advice_matches_the_exact_binomial_bound(instances, replicates):
    # Reference: scipy.stats.binomtest exact interval (one-sided 95% = lower end of two-sided 90%).
    # For the instances: all N = instances x replicates trials succeeding must reach 0.9. For the class,
    # when each instance decides alone: all instances succeeding must reach 0.9.
    from calib.verdicts.scope import design_advice

    def reaches(n):
        return stats.binomtest(n, n).proportion_ci(confidence_level=0.90, method="exact").low >= 0.9

    advice = design_advice(instances, replicates, 0.9, 0.95)
    assert advice["instances_ok"] == reaches(instances * replicates)
    assert advice["class_sure"] == reaches(instances)
    assert reaches(instances * advice["replicates_needed"]) and reaches(instances + advice["instances_to_add"])
    assert advice["class_possible"] == (reaches(instances) or (replicates > 1 and reaches(instances * replicates)))


def test_dry_run_gives_the_advice_per_size(tmp_path, capsys):
    from calib.cli import main

    spec = tmp_path / "spec.toml"
    spec.write_text('[campaign]\nname = "advice"\nroot_seed = 1\nreplicates = 1\n\n[[families]]\nname = "lp-planted"\n'
                    'sizes = [{rows = 20, cols = 40}]\ninstances = 10\n\n[sweep]\nprojectors = ["gaussian"]\nk = [4, 8]\n')
    assert main(["run", str(spec), "--dry-run", "--no-probe", "--out", str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    assert "these instances: cannot certify 90% at 95% (10 trials per k, 29 needed): use replicates = 3" in out
    assert "the class: cannot certify 90% at 95% with 10 instances x 1 replicate; use instances = 29 (add 19)" in out


def test_a_stored_solver_error_is_reported_by_run_and_kept_out_of_the_rate(tmp_path, capsys):
    # A real tiny campaign, then one stored projected solve marked as a solver error (a mock of what
    # an adapter stores when the solver fails): the table counts it apart, the rate ignores it.
    import sqlite3

    from analysis_campaign import run_spec
    from calib.analysis.tables import build_table
    from calib.store.reading import count_solver_errors
    from calib.store.database import Store

    spec = ('[campaign]\nname = "solver-error"\nroot_seed = 3\nreplicates = 3\n\n[[families]]\nname = "lp-planted"\n'
            'sizes = [{rows = 4, cols = 8}]\n\n[sweep]\nprojectors = ["gaussian"]\nk = [4]\nretrievals = ["basis-lstsq"]\n')
    path = run_spec(spec, tmp_path)
    with sqlite3.connect(path) as db:
        trial, metrics = db.execute("SELECT trial_id, metrics FROM trials ORDER BY trial_id LIMIT 1").fetchone()
        record = json.loads(metrics)
        record.update(proj_status="solver_failed", proj_gap=None)
        db.execute("UPDATE trials SET metrics = ? WHERE trial_id = ?", (json.dumps(record), trial))
    db.close()
    assert count_solver_errors(path) == 1
    store = Store.open_existing(path)
    try:
        table = build_table(store, make_predicate("bound"), Confidence())
    finally:
        store.close()
    (point,) = table["analyses"][0]["entries"][0]["grid"]
    assert point["solver_errors"] == 1 and point["trials"] == 2
    assert "solver error" in table["target"]["solver_errors_rule"]
