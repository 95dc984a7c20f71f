"""Safe-k tables from a real store: schema, stable bytes, refusal of bad files, lookup both ways."""

from __future__ import annotations

import json
import math

import jsonschema
import numpy as np
import pandas as pd
import pytest
from scipy import stats

from analysis_campaign import run_campaign_in
from calib import theory
from calib.analysis.lookup import Query, k_for, success_for
from calib.analysis.records import SafeKTable
from calib.analysis.tablefile import dumps, read_table, schema
from calib.analysis.tables import build_table, table_to_frame, write_table
from calib.cli import main
from calib.errors import InputError
from calib.store.database import Store
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import make_predicate

LADDER = [0.01, 0.05]


@pytest.fixture(scope="module")
def store_path(tmp_path_factory):
    return run_campaign_in(tmp_path_factory.mktemp("campaign"))


def _table(path, **options):
    store = Store.open_existing(path)
    try:
        return build_table(store, make_predicate("bound"), Confidence(), taus=LADDER, **options)
    finally:
        store.close()


@pytest.fixture(scope="module")
def table_file(store_path, tmp_path_factory):
    path = tmp_path_factory.mktemp("table") / "safe_k.json"
    write_table(_table(store_path), json_path=path)
    return path


def test_table_validates_against_the_shipped_schema(table_file):
    # Reference: the JSON Schema 2020-12 validator of the jsonschema package.
    table = json.loads(table_file.read_text())
    jsonschema.Draft202012Validator.check_schema(schema())
    jsonschema.Draft202012Validator(schema()).validate(table)
    assert table["campaign"]["name"] == "analysis-check" and table["code_version"]
    assert [analysis["tau"] for analysis in table["analyses"]] == LADDER
    assert all(analysis["predicate"]["gap"] == analysis["tau"] for analysis in table["analyses"])


def test_counts_and_bounds_match_scipy(table_file):
    # Reference: scipy.stats.binomtest one-sided Clopper-Pearson; safe k by the monotone rule.
    table = json.loads(table_file.read_text())
    for entry in table["analyses"][0]["entries"]:
        passes = []
        for point in entry["grid"]:
            low = stats.binomtest(point["successes"], point["trials"], alternative="greater").proportion_ci(0.95).low
            assert point["lower_bound"] == pytest.approx(low, abs=1e-6)
            passes.append(low >= 0.9)
        expected = next((point["k"] for i, point in enumerate(entry["grid"]) if all(passes[i:])), None)
        assert entry["safe_k"] == expected


def test_rank_planted_lp_needs_about_its_rank(table_file):
    # The planted LP has rank 8: a row projection to k >= 8 keeps the row space of A (Vu, Poirion
    # and Liberti 2018, the projected feasible set equals the original when TA keeps A's rank), so
    # the bound is exact from k = 8 on (with probability one: every trial succeeds) and the true k50
    # lies below 8, so the 95% interval of the fitted k50 must lie below 8 as well.
    table = json.loads(table_file.read_text())
    planted = [entry for entry in table["analyses"][1]["entries"] if entry["family"] == "lp-planted"]
    assert len(planted) == 3
    for entry in planted:
        assert entry["safe_k"] == 8
        assert all(point["successes"] == point["trials"] for point in entry["grid"] if point["k"] >= 8)
        assert any(point["successes"] < point["trials"] for point in entry["grid"] if point["k"] < 8)
        assert entry["transition"]["k50"] < entry["transition"]["k50_interval"][1] < 8
    law = next(law for law in table["analyses"][1]["laws"] if law["family"] == "lp-planted")
    assert law["safe_k_law"]["C"] == 0.0 and law["safe_k_law"]["a"] == 8.0


def test_theory_ratios_use_the_stated_eps(table_file):
    # Dasgupta-Gupta (2003, proof of Theorem 2.1: per-pair failure <= 2 exp(-k c / 2), union over
    # n(n-1)/2 pairs) at the eps and the failure probability delta the table states; ratio = bound / safe k.
    table = json.loads(table_file.read_text())
    delta = table["target"]["delta"]
    for analysis in table["analyses"]:
        for entry in analysis["entries"]:
            eps, n = entry["theory"]["eps"], entry["n_points"]
            assert eps == analysis["tau"] and entry["theory"]["failure"] == delta
            bound = entry["theory"]["bounds"]["dasgupta-gupta"]
            assert bound["failure"] == delta
            assert bound["k"] == math.ceil(2 * math.log(n * (n - 1) / delta) / (eps**2 / 2 - eps**3 / 3))
            if entry["safe_k"]:
                assert bound["ratio"] == pytest.approx(bound["k"] / entry["safe_k"], rel=1e-5)
        for law in analysis["laws"]:
            # the rule's constant in k = C ln n: 4 / (eps^2/2 - eps^3/3), up to rounding (1/30)
            eps = law["theory"]["eps"]
            assert law["theory"]["rules"]["dasgupta-gupta"]["C"] == pytest.approx(4 / (eps**2 / 2 - eps**3 / 3), abs=1 / 30)
    assert sorted(table["theory"]["rules"]) == sorted(theory.RULES)


def test_reanalysis_and_a_second_run_give_identical_bytes(store_path, table_file, tmp_path):
    # README ("Tables are written with sorted keys and no timings") and docs/robustness.md (Reproducibility):
    # analysing the same store twice, or a campaign run twice, gives the same bytes.
    assert dumps(_table(store_path)) == table_file.read_text()
    second = run_campaign_in(tmp_path / "again")
    assert dumps(_table(second)) == table_file.read_text()
    first_csv, second_csv = tmp_path / "a.csv", tmp_path / "b.csv"
    write_table(_table(store_path), csv_path=first_csv)
    write_table(_table(second), csv_path=second_csv)
    assert first_csv.read_bytes() == second_csv.read_bytes()


def test_csv_has_one_line_per_tau_cell_and_k(table_file, tmp_path):
    table = read_table(table_file)
    path = tmp_path / "t.csv"
    write_table(table, csv_path=path)
    frame = pd.read_csv(path)
    expected = sum(len(entry["grid"]) for analysis in table["analyses"] for entry in analysis["entries"])
    assert len(frame) == expected and set(frame["tau"]) == set(LADDER)


@pytest.mark.parametrize("edit, message", [
    (lambda t: t["analyses"][0]["entries"][0].update(safe_k=3), "checksum mismatch"),
    (lambda t: t.update(format_version=1), "format version 1"),
    (lambda t: t["analyses"][0]["entries"][0].pop("grid"), "schema"),
    (lambda t: t.update(format="other"), "not a calib safe-k table"),
])
def test_edited_or_foreign_tables_are_refused_naming_the_file(table_file, tmp_path, edit, message):
    table = json.loads(table_file.read_text())
    edit(table)
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(table))
    with pytest.raises(InputError) as caught:
        read_table(path)
    assert str(path) in str(caught.value) and message in str(caught.value)
    assert main(["lookup", str(path), "--family", "lp-planted", "--n", "100", "--projector", "gaussian"]) == 2


def test_not_json_is_refused(tmp_path):
    path = tmp_path / "x.json"
    path.write_text("{not json")
    with pytest.raises(InputError, match="is not JSON"):
        read_table(path)


def test_lookup_round_trips_k_to_success_to_k(table_file):
    # The logistic model's two directions are inverses: k -> success p -> k at p returns k.
    table = SafeKTable.from_dict(read_table(table_file))  # the records the lookup reads
    for n in (61, 121, 170, 400):  # measured, measured, between sizes, beyond them
        query = Query("lp-planted", n, "gaussian", tau=0.05)
        for k in (6, 7, 9):
            p = success_for(table, query, k)["success"]
            back = k_for(table, query, Confidence(delta=1 - p, level=0.95))
            assert back["k_model"] == pytest.approx(k, rel=1e-9)
            assert back["extrapolated"] == (n > 241)


def test_lookup_answers_from_the_law_and_flags_extrapolation(table_file, capsys):
    table = SafeKTable.from_dict(read_table(table_file))  # the records the lookup reads
    inside = k_for(table, Query("lp-planted", 170, "gaussian", tau=0.05, scope="instances"))
    outside = k_for(table, Query("lp-planted", 5000, "gaussian", tau=0.05, scope="instances"))
    assert inside["safe_k"] == 8 and not inside["extrapolated"]
    assert outside["safe_k"] == 8 and outside["extrapolated"] and "20.7 x the largest measured n" in outside["extrapolation"]
    # the class answer (the default): one instance per size cannot speak for the class
    klass = k_for(table, Query("lp-planted", 170, "gaussian", tau=0.05))
    assert klass["safe_k"] is None and "29 are needed" in klass["method"]
    # a looser target can only lower the answer (the monotone rule on the same counts)
    looser = k_for(table, Query("lp-planted", 170, "gaussian", tau=0.05, scope="instances"), Confidence(delta=0.5, level=0.95))
    assert looser["safe_k"] <= inside["safe_k"]
    # a tau between ladder steps is answered conservatively by the stricter step
    assert k_for(table, Query("lp-planted", 170, "gaussian", tau=0.03))["tau"] == 0.01
    assert main(["lookup", str(table_file), "--family", "lp-planted", "--n", "5000", "--projector", "gaussian"]) == 0
    assert "EXTRAPOLATED" in capsys.readouterr().out
    assert main(["lookup", str(table_file), "--family", "lp-planted", "--n", "121", "--projector", "gaussian",
                 "--k", "7", "--tau", "0.05", "--json"]) == 0
    answer = json.loads(capsys.readouterr().out)
    assert 0 < answer["success"] < 1 and answer["error"]["metric"] == "proj_gap"
    # in the family's own size keys: n and m from the family, a measured size answered as measured
    assert main(["lookup", str(table_file), "--family", "lp-planted", "--size", "rows=60,cols=120", "--param", "rank=8",
                 "--projector", "gaussian", "--tau", "0.05", "--scope", "instances", "--json"]) == 0
    answer = json.loads(capsys.readouterr().out)
    assert (answer["n"], answer["m"], answer["safe_k"]) == (121, 60, 8) and answer["method"] == "measured at this size"
    # a size whose m is below what the class needs (the law gives 8): no reduction, never a k above m
    assert main(["lookup", str(table_file), "--family", "lp-planted", "--n", "5000", "--m", "6",
                 "--projector", "gaussian", "--tau", "0.05", "--scope", "instances"]) == 0
    assert "no reduction meets the target at this size" in capsys.readouterr().out


def test_lookup_refuses_unknown_classes_and_bad_values(table_file):
    table = SafeKTable.from_dict(read_table(table_file))  # the records the lookup reads
    with pytest.raises(InputError, match="no entries"):
        k_for(table, Query("lp-planted", 100, "srht"))
    with pytest.raises(InputError, match="--n"):
        Query("lp-planted", 1, "gaussian")
    with pytest.raises(InputError, match="stricter than every tolerance"):
        k_for(table, Query("lp-planted", 100, "gaussian", tau=0.001))
    with pytest.raises(InputError, match="--k"):
        success_for(table, Query("lp-planted", 100, "gaussian"), 0)


def test_single_size_class_has_no_law_and_says_why(table_file):
    table = read_table(table_file)
    law = next(law for law in table["analyses"][0]["laws"] if law["family"] == "lp-farkas")
    assert law["safe_k_law"]["a"] is None and "fewer than two sizes" in law["safe_k_law"]["reason"]
    answer = k_for(SafeKTable.from_dict(table), Query("lp-farkas", 500, "gaussian"))
    assert answer["safe_k"] is None and answer["extrapolated"]


def test_tables_command_writes_timings_apart(store_path, tmp_path, capsys):
    json_path, timings = tmp_path / "t.json", tmp_path / "timings.csv"
    assert main(["tables", str(store_path), "--json", str(json_path), "--timings", str(timings), "--tau", "0.05"]) == 0
    assert "seconds" not in json_path.read_text() and "_s\"" not in json_path.read_text()
    frame = pd.read_csv(timings)
    assert {"baseline_median_s", "reduced_median_s", "speedup", "faster_share", "at_safe_k"} <= set(frame.columns)
    at_safe = frame[frame["at_safe_k"]]
    assert len(at_safe) == 3 and np.all(at_safe["speedup"] > 0)
    assert main(["tables", str(store_path), "--delta", "1.5"]) == 2


def test_policy_table_validates_recounts_and_shows_in_lookup_and_tables(store_path, tmp_path, capsys):
    # The policy block is recounted here from the stored rows (pandas, not calib's aggregation), its
    # bound is scipy's beta quantile (Clopper-Pearson), and the schema is checked by jsonschema.
    from calib.analysis.rows import load_rows

    store = Store.open_existing(store_path)
    try:
        table = build_table(store, make_predicate("usable"), Confidence(), policy=True)
        rows = load_rows(store)
    finally:
        store.close()
    jsonschema.Draft202012Validator(schema()).validate(json.loads(dumps(table)))
    entries = table["analyses"][0]["entries"]
    for entry in (entries[0], entries[-1]):  # lp-farkas (infeasible) and the largest lp-planted
        _check_policy_block(entry, rows)
    path = tmp_path / "policy.json"
    write_table(table, json_path=path)
    assert main(["lookup", str(path), "--family", "lp-planted", "--n", "121", "--projector", "gaussian"]) == 0
    assert "policy (measured at" in capsys.readouterr().out
    assert main(["tables", str(store_path), "--policy"]) == 0
    assert "policy k" in capsys.readouterr().out


def _check_policy_block(entry, rows):
    from calib.analysis.policy import NO_SAVING

    block = entry["policy"]
    cell = rows[(rows["family"] == entry["family"]) & (rows["size"] == entry["size"])
                & (rows["projector"] == entry["projector"]) & (rows["retrieval"] == entry["retrieval"])]
    for point in block["grid"]:
        at_k = cell[cell["k"] == point["k"]]
        total = pd.to_numeric(at_k["t_total"])
        usable = (((at_k["orig_status"] == "optimal") & (at_k["proj_status"] == "optimal")
                   & (pd.to_numeric(at_k["obj_error"]) <= 0.05) & (pd.to_numeric(at_k["feas_error"]) <= 0.05)
                   & (pd.to_numeric(at_k["sign_violation"]) <= 0.05))
                  | ((at_k["orig_status"] == "infeasible") & (at_k["proj_status"] == "infeasible")))
        saved = pd.to_numeric(at_k["iterations_saved"])  # an exact retrieval counts when it saves time and iterations
        faster = (total < pd.to_numeric(at_k["t_baseline"])) & (saved.isna() | (saved > 0))
        assert point["successes"] == int((usable & faster).sum())
        expected = 0.0 if point["successes"] == 0 else stats.beta.ppf(0.05, point["successes"], len(at_k) - point["successes"] + 1)
        assert point["lower_bound"] == pytest.approx(expected, rel=5e-4, abs=1e-12)  # 4 significant digits stored
        assert point["time_median_s"] == pytest.approx(total.median(), rel=1e-3)
    assert (block["k"] is None) == (block["answer"] == NO_SAVING)
