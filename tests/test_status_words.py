"""Solver statuses in calib's own words, and the store migration that rewrites the former ones.

The trade's own words (optimal, infeasible, unbounded) stay; the others are calib's
(no_finite_optimum, unverified, stopped_on_time, stopped_on_iterations, solver_failed). A store of
format 4 or older holds the former words: opening it for writing rewrites them (format 5), and
reading it without migrating maps them.
"""

from __future__ import annotations

import json
import sqlite3

import highspy
import scs

from analysis_campaign import run_spec
from calib.analysis.rows import load_rows
from calib.solvers import highs, scs_base
from calib.solvers.result import FORMER_STATUSES, STATUSES
from calib.store.database import Store
from calib.store.schema import STORE_FORMAT

SPEC = """
[campaign]
name = "words"
root_seed = 5
replicates = 2

[[families]]
name = "lp-planted"
sizes = [{rows = 12, cols = 24}]

[sweep]
projectors = ["gaussian"]
k = [4, 12]
retrievals = ["basis-lstsq"]
"""


def test_every_adapter_maps_into_the_vocabulary_and_no_former_word_survives():
    assert set(highs.STATUS_TABLE.values()) <= set(STATUSES)
    assert set(scs_base.STATUS_TABLE.values()) <= set(STATUSES)
    assert not set(FORMER_STATUSES) & set(STATUSES)
    assert set(FORMER_STATUSES.values()) <= set(STATUSES)
    # the solver's own constants keep their meaning under calib's words (HiGHS and SCS documentation)
    assert highs.STATUS_TABLE[highspy.HighsModelStatus.kTimeLimit] == "stopped_on_time"
    assert highs.STATUS_TABLE[highspy.HighsModelStatus.kUnboundedOrInfeasible] == "no_finite_optimum"
    assert scs_base.STATUS_TABLE[scs.SOLVED_INACCURATE] == "unverified"


def _age_to_format_4(path) -> None:
    """Write the former words into a fresh store, as calib up to store format 4 did."""
    with sqlite3.connect(path) as db:
        first = db.execute("SELECT instance_id FROM instances LIMIT 1").fetchone()[0]
        db.execute("UPDATE instances SET orig_status = 'infeasible_or_unbounded' WHERE instance_id = ?", (first,))
        methods = json.loads(db.execute("SELECT methods FROM instances WHERE instance_id = ?", (first,)).fetchone()[0])
        for record in methods.values():
            record["status"] = "time_limit"
        db.execute("UPDATE instances SET methods = ? WHERE instance_id = ?", (json.dumps(methods), first))
        rows = db.execute("SELECT rowid, metrics FROM trials").fetchall()
        for rowid, text in rows[:2]:
            record = json.loads(text)
            record["proj_status"] = "iteration_limit"
            db.execute("UPDATE trials SET metrics = ? WHERE rowid = ?", (json.dumps(record, sort_keys=True), rowid))
        db.execute("UPDATE campaign SET value = '4' WHERE key = 'store_format'")
    db.close()


def test_reading_an_older_store_maps_the_former_words(tmp_path):
    path = run_spec(SPEC, tmp_path / "c")
    _age_to_format_4(path)
    store = Store.open_existing(path)
    try:
        rows = load_rows(store)
    finally:
        store.close()
    assert set(rows["proj_status"]) <= set(STATUSES) and "stopped_on_iterations" in set(rows["proj_status"])


def test_resuming_an_older_store_rewrites_the_former_words(tmp_path):
    path = run_spec(SPEC, tmp_path / "c")
    _age_to_format_4(path)
    again = run_spec(SPEC, tmp_path / "c")  # the same spec: resumes, migrating first
    assert again == path
    with sqlite3.connect(path) as db:
        assert db.execute("SELECT value FROM campaign WHERE key = 'store_format'").fetchone()[0] == str(STORE_FORMAT)
        assert {row[0] for row in db.execute("SELECT orig_status FROM instances")} <= set(STATUSES)
        for (text,) in db.execute("SELECT methods FROM instances"):
            assert {record["status"] for record in json.loads(text).values()} <= set(STATUSES)
        statuses = {json.loads(text)["proj_status"] for (text,) in db.execute("SELECT metrics FROM trials")}
        assert statuses <= set(STATUSES) and "stopped_on_iterations" in statuses
    db.close()
