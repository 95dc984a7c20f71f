"""Instance features of the sketched matrix, checked against numpy and scipy as references."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg
import scipy.sparse as sp

from calib import features
from calib.features import instance_features, matrix_features
from reduce_helpers import instance


@pytest.mark.parametrize("sparse", [False, True])
def test_rank_stable_rank_and_coherence_match_numpy_and_scipy(sparse):
    rng = np.random.default_rng(0)
    low_rank = rng.standard_normal((60, 5)) @ rng.standard_normal((5, 30))
    low_rank[0] *= 50.0  # one heavy row: coherence above 1
    matrix = sp.csr_matrix(low_rank) if sparse else low_rank
    got = matrix_features(matrix)
    assert got["rank"] == np.linalg.matrix_rank(low_rank) == 5  # numpy's default tolerance rule
    singular = scipy.linalg.svdvals(low_rank)
    assert got["stable_rank"] == pytest.approx(np.sum(singular ** 2) / singular[0] ** 2, rel=1e-6)
    basis = scipy.linalg.orth(low_rank)  # orthonormal basis of the column space (scipy)
    assert got["row_coherence"] == pytest.approx(60 / 5 * np.max(np.sum(basis ** 2, axis=1)), rel=1e-6)
    assert 1.0 <= got["row_coherence"] <= 60 / 5
    assert got["nonzeros"] == np.count_nonzero(low_rank) and (got["rows"], got["cols"]) == (60, 30)


def test_large_matrix_skips_the_svd_but_keeps_the_stable_rank(monkeypatch):
    monkeypatch.setattr(features, "SVD_FLOPS", 10.0)
    matrix = sp.random(200, 100, density=0.05, random_state=1, format="csr")
    got = matrix_features(matrix)
    assert got["rank"] is None and got["row_coherence"] is None and "exceeds the cheap budget" in got["skipped"]
    singular = scipy.linalg.svdvals(matrix.toarray())
    assert got["stable_rank"] == pytest.approx(np.sum(singular ** 2) / singular[0] ** 2, rel=1e-6)


def test_planted_rank_is_seen_in_the_lp_sketched_matrix():
    # lp-planted with rank = 6: the equality rows are combinations of 6 rows, and b = A x lies in
    # their span, so [A b] has rank 6 whatever the number of rows
    built = instance("lp-planted", {"rows": 40, "cols": 80, "rank": 6})
    got = instance_features("lp", built.problem)
    assert got["rank"] == 6 and got["rows"] == 40 and got["cols"] == 81


@pytest.mark.parametrize("family,params,kind,rows", [
    ("sdp-planted", {"order": 6, "constraints": 12}, "sdp", 12),
    ("qp-random", {"vars": 20, "rows": 10}, "qp", 20),
    ("points-gaussian", {"points": 30, "dim": 50}, "points", 50),
])
def test_every_kind_has_a_sketched_matrix_whose_rows_are_its_projected_dimension(family, params, kind, rows):
    from calib.reduce import HANDLERS

    built = instance(family, params)
    got = instance_features(kind, built.problem)
    assert got["rows"] == rows == HANDLERS[kind].projected_dim(built.problem)
    assert got["rank"] >= 1 and got["stable_rank"] <= got["rank"] + 1e-9


def test_a_campaign_stores_features_once_per_instance_and_the_table_carries_their_median(tmp_path):
    """References: numpy's matrix_rank and norms of [A b] per instance, numpy's median per cell."""
    import json
    import sqlite3

    from engine_helpers import write_spec

    from calib.analysis.tables import build_table, table_to_frame
    from calib.store.database import Store
    from calib.sweep.expansion import instance_refs
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import make_predicate

    spec = load_spec(write_spec(tmp_path, replicates=1))
    summary = run_campaign(spec, tmp_path / "out", inline=True)
    with sqlite3.connect(summary.store_path) as db:
        stored = dict(db.execute("SELECT instance_id, features FROM instances").fetchall())
    assert len(stored) == 6
    by_size: dict = {}
    for ref, _, _ in instance_refs(spec):
        problem = ref.build().problem
        A = problem.A.toarray() if sp.issparse(problem.A) else np.asarray(problem.A)
        sketched = np.column_stack([A, problem.b])
        record = json.loads(stored[ref.instance_id])
        singular = np.linalg.svd(sketched, compute_uv=False)
        assert record["rank"] == np.linalg.matrix_rank(sketched)
        assert record["stable_rank"] == pytest.approx(np.sum(singular ** 2) / singular[0] ** 2, abs=1e-6)
        by_size.setdefault((ref.family, ref.params["rows"]), []).append(record)
    store = Store.open_existing(summary.store_path)
    try:
        table = build_table(store, make_predicate("bound"), Confidence())
    finally:
        store.close()
    entries = table["analyses"][0]["entries"]
    assert len(entries) == len({(family, rows) for family, rows in by_size})  # one entry per stored size
    for entry in entries:
        records = by_size[(entry["family"], entry["params"]["rows"])]
        assert entry["features"]["instances"] == len(records) == 2
        assert entry["features"]["rows"] == entry["projected_dim"]
        assert entry["features"]["stable_rank"] == pytest.approx(np.median([r["stable_rank"] for r in records]), rel=1e-5)
        assert entry["features"]["rank"] == pytest.approx(np.median([r["rank"] for r in records]))
    frame = table_to_frame(table)
    assert (frame["features_rows"] == frame["projected_dim"]).all()


def test_a_store_without_features_gives_entries_without_them_and_migrates_on_resume(tmp_path):
    import sqlite3

    from engine_helpers import write_spec

    from calib.analysis.tables import build_table
    from calib.store.database import Store
    from calib.store.schema import STORE_FORMAT, _MIGRATIONS
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import make_predicate

    # the format that added the features column; the store below is rolled back to the one before it
    added = next(version for version, columns in _MIGRATIONS.items() if ("instances", "features", "TEXT") in columns)
    spec_path = write_spec(tmp_path, replicates=1)
    summary = run_campaign(load_spec(spec_path), tmp_path / "out", inline=True)
    with sqlite3.connect(summary.store_path) as db:  # the layout before features were stored (format 3)
        db.execute("ALTER TABLE instances DROP COLUMN features")
        db.execute("UPDATE campaign SET value = ? WHERE key = 'store_format'", (str(added - 1),))
    store = Store.open_existing(summary.store_path)
    try:
        table = build_table(store, make_predicate("bound"), Confidence())
    finally:
        store.close()
    assert all(entry["features"] is None for entry in table["analyses"][0]["entries"])
    run_campaign(load_spec(spec_path), tmp_path / "out", inline=True)  # resume: nothing to run, migrates
    with sqlite3.connect(summary.store_path) as db:
        assert "features" in {row[1] for row in db.execute("PRAGMA table_info(instances)")}
        assert db.execute("SELECT value FROM campaign WHERE key = 'store_format'").fetchone()[0] == str(STORE_FORMAT)
