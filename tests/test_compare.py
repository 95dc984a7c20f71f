"""Paired projector comparisons (calib.analysis.compare, `calib compare`).

References outside the project: scipy.stats.binomtest (exact binomial test on the discordant pairs,
which is McNemar's exact test), statsmodels' mcnemar(exact=True), and scipy.stats.permutation_test
with paired sign flips. The calibration of the verdict is checked by simulation against a known truth.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import special, stats

from analysis_campaign import run_spec
from calib.analysis.compare import (Settings, class_test, compare_pair, instance_counts, instances_for_any_detection,
                                    mcnemar_exact, sign_flip_pvalue)
from calib.cli import main
from calib.verdicts.saferule import Confidence

CONFIDENCE = Confidence(delta=0.1, level=0.95)


# ----- the tests against reference libraries ---------------------------------------------------

@pytest.mark.parametrize("a_only,b_only", [(9, 1), (3, 7), (0, 5), (12, 12), (1, 0), (25, 11)])
def test_mcnemar_exact_matches_scipy_binomtest_and_statsmodels(a_only, b_only):
    from statsmodels.stats.contingency_tables import mcnemar

    reference = stats.binomtest(a_only, a_only + b_only, 0.5).pvalue  # scipy: exact two-sided binomial test
    assert mcnemar_exact(a_only, b_only) == pytest.approx(min(1.0, reference), rel=1e-12)
    table = [[20, a_only], [b_only, 30]]  # concordant cells do not enter McNemar's test
    assert mcnemar_exact(a_only, b_only) == pytest.approx(mcnemar(table, exact=True).pvalue, rel=1e-12)


def test_per_k_mcnemar_counts_discordant_pairs_of_matched_trials():
    # hand-built: 10 matched pairs at k = 8, A succeeds alone in 6, B alone in 1, both in 2, neither in 1
    a = [1] * 6 + [0] * 1 + [1] * 2 + [0]
    b = [0] * 6 + [1] * 1 + [1] * 2 + [0]
    a_rows, b_rows = synthetic_pair_rows(a, b)
    result = compare_pair(a_rows, b_rows, ("A", "B"), ("g",), Settings(CONFIDENCE, resamples=100))
    (at_k,) = result["per_k"]
    assert (at_k["a_only"], at_k["b_only"], at_k["pairs"]) == (6, 1, 10)
    assert at_k["mcnemar_p"] == pytest.approx(stats.binomtest(1, 7, 0.5).pvalue, rel=1e-5)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_sign_flip_matches_scipy_permutation_test(seed):
    differences = np.random.default_rng(seed).normal(0.1, 0.2, size=9)
    reference = stats.permutation_test((differences,), np.sum, permutation_type="samples",
                                       n_resamples=np.inf, alternative="two-sided").pvalue
    assert sign_flip_pvalue(differences, np.random.default_rng(0)) == pytest.approx(reference, rel=1e-12)


def test_fewest_instances_that_can_detect():
    # two-sided sign-flip: the smallest p-value with n instances is 2 / 2^n (all signs alike)
    assert instances_for_any_detection(0.05) == 6
    assert sign_flip_pvalue(np.ones(5), np.random.default_rng(0)) == pytest.approx(2 / 32)
    assert sign_flip_pvalue(np.ones(6), np.random.default_rng(0)) == pytest.approx(2 / 64)


# ----- known truth: simulated campaigns ------------------------------------------------------

GRID = [6, 7, 8, 9, 10, 11, 12, 14, 16]
SLOPE = 8.0         # success = expit(SLOPE * ln(k / k50_i)): the transition spans about 6..11 around k50 = 8
SPREAD = 0.15       # instance-to-instance spread of ln k50 (shared by both projectors: the pairing)


def synthetic_pair_rows(a_success, b_success, k=8):
    """Rows of projectors A and B at one k: pair index i is instance i // 5, replicate i % 5."""
    base = {"family": "f", "size": "s", "params": "{}", "class_params": "{}", "retrieval": "r", "kind": "lp",
            "projected_dim": 60,
            "t_sketch": 0.01, "t_solve_proj": 0.02, "t_retrieve": 0.0, "t_total": 0.03}
    frames = []
    for name, outcomes in (("A", a_success), ("B", b_success)):
        frames.append(pd.DataFrame([{**base, "projector": name, "instance_id": f"i{index // 5}", "k": k,
                                     "replicate": index % 5, "success": bool(value)}
                                    for index, value in enumerate(outcomes)]))
    return frames[0], frames[1]


def simulated_campaign(rng, instances: int, replicates: int, k50_factor_a: float) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Rows of projectors A and B on the same instances; A's k50 is k50_factor_a times B's."""
    log_k50 = np.log(8.0) + SPREAD * rng.standard_normal(instances)
    ks = np.array(GRID, dtype=float)
    frames = []
    for name, factor in (("A", k50_factor_a), ("B", 1.0)):
        p = special.expit(SLOPE * (np.log(ks)[None, :] - (log_k50[:, None] + np.log(factor))))
        success = rng.random((instances, len(GRID), replicates)) < p[:, :, None]
        i, j, r = np.meshgrid(range(instances), range(len(GRID)), range(replicates), indexing="ij")
        frames.append(pd.DataFrame({
            "family": "f", "size": "s", "params": "{}", "class_params": "{}", "retrieval": "r", "kind": "lp",
            "projected_dim": 60, "projector": name, "instance_id": [f"i{x}" for x in i.ravel()], "k": ks[j.ravel()].astype(int),
            "replicate": r.ravel(), "success": success.ravel(), "t_sketch": 0.01, "t_solve_proj": 0.02,
            "t_retrieve": 0.0, "t_total": 0.03}))
    return frames[0], frames[1]


def detection_rate(campaigns: int, instances: int, replicates: int, factor: float, seed: int) -> float:
    """Share of simulated campaigns in which the class-scope test (the verdict's decision) detects a difference."""
    rng = np.random.default_rng(seed)
    detected = 0
    for _ in range(campaigns):
        a, b = simulated_campaign(rng, instances, replicates, factor)
        ids = sorted(set(a["instance_id"]))
        test = class_test(instance_counts(a, ids, GRID), instance_counts(b, ids, GRID), rng)
        detected += test["p"] <= 1.0 - CONFIDENCE.level
    return detected / campaigns


@pytest.mark.slow
def test_projectors_equal_in_law_show_no_difference_at_the_nominal_rate():
    # 400 simulated comparisons of two projectors with the same law (independent streams, shared
    # instances). The sign-flip test is exact, so its false-alarm rate is at most 5%; the check allows
    # the binomial sampling error of 400 campaigns: 5% + 2.33 sd (one-sided 99%) = 7.5%.
    campaigns = 400
    rate = detection_rate(campaigns, instances=10, replicates=3, factor=1.0, seed=20261202)
    assert rate <= 0.05 + 2.33 * np.sqrt(0.05 * 0.95 / campaigns), rate


@pytest.mark.slow
def test_a_projector_that_needs_20_percent_more_k_is_detected_at_the_stated_power():
    # Stated power: at 8 instances x 3 replicates on this grid, a 20% larger k50 is detected in at
    # least 90% of campaigns (measured: 98% of 200); the check allows 2.33 binomial sd of 200
    # campaigns below the stated 90%.
    campaigns = 200
    rate = detection_rate(campaigns, instances=8, replicates=3, factor=1.2, seed=7)
    assert rate >= 0.90 - 2.33 * np.sqrt(0.9 * 0.1 / campaigns), rate


def test_detected_difference_reads_as_more_k_in_the_verdict():
    rng = np.random.default_rng(3)
    a, b = simulated_campaign(rng, instances=12, replicates=5, k50_factor_a=1.3)
    result = compare_pair(a, b, ("A", "B"), ("g",), Settings(CONFIDENCE, resamples=200))
    assert result["class_test"]["p"] <= 0.05
    assert result["k50"]["ratio"] > 1.1 and result["k50"]["ratio_interval"][0] > 1.0
    assert result["verdict"].startswith("A needs ") and "more k than B" in result["verdict"]


def test_a_difference_without_transitions_is_stated_as_a_success_difference():
    # B succeeds only at the largest k, A never: no k50 exists, yet 8 instances show the difference
    rows = []
    for name, top in (("A", 0.0), ("B", 1.0)):
        for i in range(8):
            for k in (4, 8, 12):
                rows.append({"family": "f", "size": "s", "params": "{}", "class_params": "{}", "retrieval": "r", "kind": "lp",
                             "projected_dim": 12, "projector": name, "instance_id": f"i{i}", "k": k, "replicate": 0,
                             "success": bool(top) and k == 12, "t_sketch": 0.01, "t_solve_proj": 0.02,
                             "t_retrieve": 0.0, "t_total": 0.03})
    frame = pd.DataFrame(rows)
    result = compare_pair(frame[frame.projector.eq("A")], frame[frame.projector.eq("B")], ("A", "B"), ("g",),
                          Settings(CONFIDENCE, resamples=100))
    assert result["class_test"]["p"] == pytest.approx(2 / 2 ** 8)
    assert result["verdict"].startswith("A succeeds less often than B at the same k")


def test_three_instances_can_never_detect_and_say_so():
    rng = np.random.default_rng(4)
    a, b = simulated_campaign(rng, instances=3, replicates=10, k50_factor_a=1.5)
    result = compare_pair(a, b, ("A", "B"), ("g",), Settings(CONFIDENCE, resamples=100))
    assert result["class_test"]["p"] >= 0.25  # 2 / 2^3
    assert "3 instances can never show a difference at 0.05; at least 6 are needed" in result["verdict"]


# ----- the command on a real campaign -------------------------------------------------------

SPEC = """
[campaign]
name = "compare-check"
root_seed = 3
replicates = 4

[[families]]
name = "lp-planted"
sizes = [{rows = 40, cols = 80}]
instances = 6
params = {rank = 6, cost = "nonnegative"}

[sweep]
projectors = ["gaussian", "srht"]
k = [4, 5, 6, 7, 8]
retrievals = ["basis-lstsq"]

[solver]
time_limit_s = 10
"""


def test_compare_command_writes_schema_valid_reproducible_json(tmp_path, capsys):
    store = run_spec(SPEC, tmp_path / "campaign")
    first, second = tmp_path / "a.json", tmp_path / "b.json"
    assert main(["compare", str(store), "--json", str(first), "--resamples", "200", "--preset", "bound"]) == 0
    out = capsys.readouterr().out
    assert "srht vs gaussian" in out or "srht needs" in out
    assert main(["compare", str(store), "--json", str(second), "--resamples", "200", "--preset", "bound"]) == 0
    assert first.read_bytes() == second.read_bytes()  # the same store gives the same bytes
    document = json.loads(first.read_text())
    assert document["campaign"]["spec_fingerprint"] and document["campaign"]["package_versions"]
    (group,) = document["groups"]
    (pair,) = group["pairs"]
    assert (pair["a"], pair["b"], pair["instances"]) == ("srht", "gaussian", 6)
    assert pair["matched_trials"] == 6 * 4 * 5
    assert sum(test["pairs"] for test in pair["per_k"]) == pair["matched_trials"]


@pytest.mark.parametrize("argv,where", [(["--reference", "nope"], "--reference"), (["--projectors", "nope"], "--projectors"),
                                        (["--resamples", "5"], "--resamples")])
def test_compare_bad_options_are_one_line_errors(tmp_path, capsys, argv, where):
    store = run_spec(SPEC.replace('"gaussian", "srht"', '"gaussian"'), tmp_path / "campaign")
    assert main(["compare", str(store), *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and where in err


def test_report_draws_k50_per_projector_for_a_family_with_two_projectors(tmp_path):
    store = run_spec(SPEC, tmp_path / "campaign")
    html = tmp_path / "report.html"
    # the gap reading, as the comparisons above: its transitions on this small grid fit a k50
    assert main(["report", str(store), "--html", str(html), "--preset", "bound"]) == 0
    text = html.read_text()
    assert '<figure id="fig-projectors-lp-planted">' in text and "k50 per projector" in text
