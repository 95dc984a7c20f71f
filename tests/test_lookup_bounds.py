"""`calib lookup` in the user's terms and within bounds: sizes, MPS files, never k above m."""

from __future__ import annotations

import json
import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calib.analysis.lookup import Query, bounded, class_entries, k_for, safe_ks, size_of, size_of_mps
from calib.analysis.records import Analysis
from calib.analysis.tables import build_analysis
from calib.cli import main
from calib.families import get
from calib.families.lp_real import NETLIB_DIR
from calib.problems.mps import read_mps
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import make_predicate

FAMILY = "lp-planted"


def _table(seed: int) -> dict:
    """A random table of lp-planted sizes: trials drawn from a logistic curve whose k50 grows like
    a + C ln n, with some sizes where even k = m misses (censored) and instances x replicates
    varying by size (so some sizes have a class answer and some do not)."""
    rng = np.random.default_rng([seed, 2026])
    family = get(FAMILY)
    frames = []
    for size_index in range(int(rng.integers(2, 6))):
        cols = int(rng.integers(20, 4000))
        rows = int(rng.integers(5, cols))
        params = family.resolve({"rows": rows, "cols": cols}, "test")
        m, n = family.projected_dim(params), family.n_points(params)
        k50 = float(rng.uniform(-20, 10) + rng.uniform(0.5, 8) * math.log(n))
        ks = np.unique(np.clip(np.round(np.geomspace(1, m, 8)).astype(int), 1, m))
        instances, replicates = (30, 2) if rng.random() < 0.5 else (3, 10)
        k = np.repeat(ks, instances * replicates)
        instance = np.tile(np.repeat(np.arange(instances), replicates), ks.size)
        p = 1 / (1 + np.exp(-4 * (np.log(k) - math.log(max(k50, 0.5)))))
        success = rng.random(k.size) < p
        frames.append(pd.DataFrame({
            "family": FAMILY, "size": family.size_label(params), "params": json.dumps(params, sort_keys=True),
            "class_params": json.dumps({key: v for key, v in params.items() if key not in family.size_keys}, sort_keys=True),
            "projector": "gaussian", "retrieval": "basis-lstsq", "k": k, "k_label": "", "kind": "lp", "status": "ok",
            "projected_dim": m, "n_points": n, "instance_id": [f"s{size_index}-i{i}" for i in instance],
            "orig_status": "optimal", "proj_status": "optimal", "proj_gap": np.where(success, 0.0, 1.0),
            "obj_error": np.nan, "feas_error": np.nan, "sign_violation": np.nan, "distortion_max": np.nan}))
    analysis = build_analysis(pd.concat(frames, ignore_index=True), make_predicate("bound"), Confidence())
    return {"target": {"delta": 0.1, "confidence": 0.95}, "analyses": [analysis]}


def _typed(table: dict) -> SimpleNamespace:
    """What the lookup reads of a table (its typed records, :mod:`calib.analysis.records`): the target
    and the analyses; the partial table here has no campaign, theory or checksum to build a whole one."""
    target = table["target"]
    return SimpleNamespace(target=SimpleNamespace(delta=target["delta"], confidence=target["confidence"]),
                           analyses=[Analysis.from_dict(analysis) for analysis in table["analyses"]])


TABLES = [_table(seed) for seed in range(4)]
TYPED = [_typed(table) for table in TABLES]


@settings(max_examples=60, deadline=None)
@given(table=st.sampled_from(TYPED), cols=st.integers(2, 10**6), share=st.floats(0.001, 0.999),
       scope=st.sampled_from(["class", "instances"]))
def test_lookup_never_answers_k_above_the_projected_dimension(table, cols, share, scope):
    rows = max(1, min(cols - 1, int(share * cols))) if cols > 1 else 1
    n, m, label = size_of(FAMILY, {"rows": str(rows), "cols": str(cols)})
    assert (n, m) == (cols + 1, rows)  # the family's own rules: m = rows, n = cols + 1
    answer = k_for(table, Query(FAMILY, n, "gaussian", m=m, scope=scope, size=label))
    assert answer["safe_k"] is None or 1 <= answer["safe_k"] <= m
    assert answer["k_model"] is None or answer["k_model"] <= m
    if answer["safe_k"] is None and answer["safe_k_law_value"] is not None:
        assert "no reduction meets the target at this size" in answer["flag"]


def test_a_measured_size_gets_its_measured_safe_k():
    for table, typed in zip(TABLES, TYPED):
        for entry in table["analyses"][0]["entries"]:
            query = Query(FAMILY, entry["n_points"], "gaussian", m=entry["projected_dim"], scope="instances")
            answer = k_for(typed, query)
            assert answer["safe_k"] == entry["safe_k"] and answer["method"].startswith("measured at this size")
            klass = k_for(typed, Query(FAMILY, entry["n_points"], "gaussian", m=entry["projected_dim"]))
            assert klass["safe_k"] == entry["class"]["safe_k"]


@pytest.mark.parametrize("scope", ["class", "instances"])
def test_stated_safe_k_equals_the_recomputation_from_the_counts(scope):
    # lookup reads a size's safe k from the table at the table's own target and recomputes it from
    # the stored counts otherwise: both paths must agree at the table's target (the reference for the
    # bounds themselves is scipy.stats, see tests/test_analysis_stats.py)
    stated = Confidence(0.1, 0.95)
    for table in TYPED:
        entries = class_entries(table.analyses[0], Query(FAMILY, 2, "gaussian"))
        assert safe_ks(entries, stated, scope, stated) == safe_ks(entries, stated, scope)


def test_law_values_are_bounded_to_one_and_m():
    # common practice: a law value is rounded up; below 1 it is raised to 1, above m there is no reduction
    assert bounded(46.2, 40) == (None, "no reduction meets the target at this size (the law gives 46.2 > m = 40)")
    assert bounded(-169.0, 40)[0] == 1 and "raised to 1" in bounded(-169.0, 40)[1]
    assert bounded(39.01, 40) == (40, "")


def test_mps_file_and_size_keys_give_n_and_m(tmp_path, capsys):
    path = NETLIB_DIR / "feasible" / "afiro.mps"
    lp = read_mps(path).to_standard().lp
    assert size_of_mps(path) == (lp.n_cols + 1, lp.n_rows, "afiro.mps")
    table_path = tmp_path / "t.json"
    from calib.analysis.tablefile import dumps, seal

    table = TABLES[0]
    full = seal({"format": "calib.safe-k", "format_version": 3, **table})
    table_path.write_text(dumps(full))
    # the schema refuses this partial table: the command must say so in one line, exit code 2
    assert main(["lookup", str(table_path), "--family", FAMILY, "--size", "rows=100,cols=400",
                 "--projector", "gaussian"]) == 2
    assert "schema" in capsys.readouterr().err


def test_size_keys_are_checked_at_the_edge():
    from calib.errors import InputError

    with pytest.raises(InputError, match="not a size key"):
        size_of(FAMILY, {"rank": "3"})
    with pytest.raises(InputError, match="--m"):
        Query(FAMILY, 100, "gaussian", m=0)


def test_a_saved_instance_gives_its_family_n_and_m():
    # the corpus's saved lp-planted 6 x 12 instance: m = rows = 6, n = cols + 1 = 13 (the family's rules)
    from pathlib import Path

    from calib.analysis.lookup import size_of_instance

    manifest = Path(__file__).parent / "corpus" / "instances" / "valid" / "inst.json"
    family, n, m, label, class_params = size_of_instance(manifest)
    assert (family, n, m, label) == ("lp-planted", 13, 6, "rows=6,cols=12")
    assert "rows" not in class_params and class_params["cost"] == "dual"
