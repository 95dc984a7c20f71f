"""A folder of one's own models answered at both scopes: these files, and the class (files as the unit).

Outside references: scipy.stats.binomtest (exact Clopper–Pearson intervals) for the per-file
bounds with the Bonferroni split, numpy's natural logarithm for the k = ceil(C ln n) grid, and the
vendored Netlib LPs sc50a, sc105, sc205 (Netlib lp/data: one staircase model family at three sizes).
"""

from __future__ import annotations

import json
import math
import shutil

import numpy as np
import pytest
from scipy import stats

import jsonschema

from calib import atlas
from calib.analysis.classrule import units_rule
from calib.analysis.tablefile import schema
from calib.cli import main
from calib.families import get
from calib.families.lp_real import NETLIB_DIR
from calib.sweep.kgrid import k_values
from calib.sweep.spec import load_spec
from calib.verdicts.stats import trials_per_unit_needed

SC = ("sc50a", "sc105", "sc205")

SPEC = """
[campaign]
name = "sc-models"
root_seed = 11
replicates = {replicates}

[[families]]
name = "mps-dir"
params = {{dir = "{folder}"}}

[sweep]
projectors = ["gaussian"]
k = {k}
retrievals = ["completion"]

[solver]
time_limit_s = 20
"""


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    path = tmp_path_factory.mktemp("sc-models")
    for name in SC:
        shutil.copy(NETLIB_DIR / "feasible" / f"{name}.mps", path / f"{name}.mps")
    return path


def _spec(tmp_path, folder, k: str, replicates: int = 3):
    path = tmp_path / "spec.toml"
    path.write_text(SPEC.format(folder=folder.as_posix(), k=k, replicates=replicates))
    return path


def test_log_multiples_set_k_from_ln_n_per_size(folder, tmp_path):
    spec = load_spec(_spec(tmp_path, folder, "{log_multiples = [2, 8]}"))
    family = get("mps-dir")
    for size in spec.families[0].sizes:
        n, m = family.n_points(size), family.projected_dim(size)
        expected = [k for k in (math.ceil(2 * np.log(n)), math.ceil(8 * np.log(n))) if k <= m]  # numpy's ln
        ks, labels = k_values(spec.k_grid, family, size)
        assert ks == expected and labels == [f"log_multiple={c}" for c in (2, 8)][:len(ks)]
    with pytest.raises(Exception, match="log_multiples"):
        load_spec(_spec(tmp_path, folder, "{log_multiples = [0, 2]}"))


def test_the_dry_run_speaks_of_files_and_replicates_never_of_instances_a_file_cannot_have(folder, tmp_path, capsys):
    assert main(["run", str(_spec(tmp_path, folder, "{fractions = [0.5, 1.0]}")), "--dry-run", "--no-probe",
                 "--out", str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    advice = out[out.index("design"):]
    assert "use instances" not in advice and "add 28" not in advice
    # 3 files at 90% and 95% with Bonferroni: (0.05 / 3)^(1/r) >= 0.9 needs r = 39 (scipy check below)
    assert "each of these 3 files (Bonferroni): cannot certify 90% at 95% (3 trials per k, 39 needed): use replicates = 39" in advice
    assert "the rule for the class (files as the unit): use 29 files (add 26)" in advice
    assert "this file: cannot certify 90% at 95% (3 trials per k, 29 needed): use replicates = 29" in advice


def test_trials_needed_per_file_match_scipy_clopper_pearson():
    for files in (1, 3, 10):
        r = trials_per_unit_needed(files, 0.9, 0.95)
        level = 1 - 2 * (0.05 / files)  # a two-sided interval's lower end is the one-sided bound at half its level
        low = lambda n: stats.binomtest(n, n).proportion_ci(confidence_level=level, method="exact").low
        assert low(r) >= 0.9 > low(r - 1)


def test_every_file_must_pass_at_its_bonferroni_level():
    # 3 files, 40 trials each at C = 4 and C = 8: file b has 38/40 at C = 4 (scipy: its 1 - 0.05/3 exact
    # bound is below 0.9), every file 40/40 at C = 8
    values, unit, success = [], [], []
    for value, fails in ((4.0, {"b": 2}), (8.0, {})):
        for name in "abc":
            for trial in range(40):
                values.append(value)
                unit.append(name)
                success.append(0 if trial < fails.get(name, 0) else 1)
    rule = units_rule(np.array(values), np.array(unit), np.array(success), {}, 0.9, 0.95, "file", "C")
    level = 1 - 2 * (0.05 / 3)
    low_b = stats.binomtest(38, 40).proportion_ci(confidence_level=level, method="exact").low
    low_all = stats.binomtest(40, 40).proportion_ci(confidence_level=level, method="exact").low
    assert low_b < 0.9 <= low_all
    assert rule["value"] == 8.0 and rule["grid"][0]["lowest_unit_bound"] == pytest.approx(low_b, rel=1e-5)
    assert rule["statement"].startswith("k = 8 ln n meets the target 90% at 95% confidence on each of these 3 files")
    assert rule["unit_confidence"] == pytest.approx(1 - 0.05 / 3, rel=1e-5)


def test_a_folder_of_netlib_sc_models_at_three_sizes_gets_an_instances_scope_rule(folder, tmp_path, capsys):
    # target 0.8 at 90% confidence: each file at 1 - 0.1/3 needs (0.1/3)^(1/r) >= 0.8, r = 16 (scipy below)
    assert trials_per_unit_needed(3, 0.8, 0.9) == 16
    spec = _spec(tmp_path, folder, "{fractions = [0.5, 1.0]}", replicates=16)
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--in-process", "--quiet"]) == 0
    table = tmp_path / "t.json"
    rules = tmp_path / "rules.json"
    assert main(["tables", str(tmp_path / "out" / "sc-models.sqlite"), "--json", str(table), "--preset", "bound",
                 "--delta", "0.2", "--confidence", "0.9", "--rule", str(rules)]) == 0
    out = capsys.readouterr().out
    (law,) = json.loads(table.read_text())["analyses"][0]["laws"]
    (rule,) = law["rules"]
    mine, klass = rule["instances"], rule["class"]
    assert rule["rule"] == "k = f m" and mine["units"] == 3 and mine["trials_per_unit"] == 16
    # the measured outcome: every file succeeds 16/16 at k = m and fails at k = m/2 (real LPs do not shrink here)
    half, full = mine["grid"]
    assert (half["value"], full["value"]) == (0.5, 1.0) and full["successes"] == full["trials"] == 48
    level = 1 - 2 * (0.1 / 3)
    assert full["lowest_unit_bound"] == pytest.approx(
        stats.binomtest(16, 16).proportion_ci(confidence_level=level, method="exact").low, rel=1e-5)
    assert mine["value"] == 1.0 and "k = m is no reduction" in mine["statement"]
    # the class: 3 files are below the 11 that certify 0.8 at 90% when each decides alone (0.1^(1/11) = 0.811)
    assert klass["value"] is None and klass["units_needed"] == 11 and "11 are needed" in klass["reason"]
    assert "rule k = f m, these 3 files: k = 1 m meets the target 80% at 90% confidence on each of these 3 files" in out

    # the rule file answers a new model of the same family (sc50b, not in the folder) in one call
    answer = atlas.rule_k(rules, "gaussian", mps=NETLIB_DIR / "feasible" / "sc50b.mps")
    jsonschema.validate(json.loads(rules.read_text()), schema("k-rule.v1.json"))  # the reference validator
    assert answer["scope"] == "instances" and answer["k"] == answer["m"] == 50 and answer["no_reduction"]
    # sc50b lies inside the measured structure but for a stable rank 0.03% below the smallest measured: "near", shown
    assert answer["fit"]["near"] == ["stable_rank"] and answer["fit"]["features"]["stable_rank"]["distance"] < 0.01
    assert not answer["withheld"] and answer["confidence"] == 0.9 and answer["target"] == 0.8
    assert "scope instances" in answer["reason"] and "not a claim about its class" in answer["reason"]


def test_a_log_multiple_grid_gives_the_rule_k_c_ln_n_at_both_scopes(folder, tmp_path):
    # 3 replicates per file: below the 39 that certify 90% at 95% on every one of 3 files, so no C is
    # certified for these files, and 3 files are below the 29 of the class; the table says both
    spec = _spec(tmp_path, folder, "{log_multiples = [2, 8]}", replicates=3)
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--in-process", "--quiet"]) == 0
    table = tmp_path / "t.json"
    assert main(["tables", str(tmp_path / "out" / "sc-models.sqlite"), "--json", str(table)]) == 0
    (law,) = json.loads(table.read_text())["analyses"][0]["laws"]
    (rule,) = law["rules"]
    assert rule["rule"] == "k = C ln n" and [point["value"] for point in rule["instances"]["grid"]] == [2.0, 8.0]
    assert rule["instances"]["value"] is None and "3 trials per file at a value, 39 needed" in rule["instances"]["reason"]
    assert rule["class"]["value"] is None and "29 are needed" in rule["class"]["reason"]
    assert law["policy_rule"]["fraction"] is None  # the k = f m block of the table: not swept
