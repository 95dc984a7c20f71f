"""Reproducibility audit: every published number can be re-derived from the store alone.

A small campaign over the four problem kinds (LP, SDP, QP, point set) and four projectors runs
twice from scratch in two folders, once in-process and once on a local pool of two workers. The
safe-k tables (JSON and CSV, two predicates) must be byte-identical, and so must every stored
metric apart from timings. Then ``calib rerun`` re-runs a random (fixed-seed) sample of stored
trials alone, one per family and two more, and must find every value equal (timings aside).
Reference: DEVELOPERS.md, "Randomness" (a trial is a pure function of its
identity); the comparison itself is exact equality, no tolerance.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from calib.cli import main

AUDIT_SPEC = """
[campaign]
name = "audit"
root_seed = 8088
replicates = 2

[[families]]
name = "lp-planted"
sizes = [{rows = 16, cols = 32}, {rows = 32, cols = 64}]
params = {rank = 4, cost = "nonnegative"}

[[families]]
name = "sdp-maxcut"
sizes = [{nodes = 6}]

[[families]]
name = "qp-random"
sizes = [{vars = 12, rows = 8}]

[[families]]
name = "points-gaussian"
sizes = [{points = 10, dim = 24}]

[sweep]
projectors = ["gaussian", "srht", {name = "sparse-jl", s = 2}, "countsketch"]
k = {fractions = [0.25, 0.5, 0.75]}

[solver]
time_limit_s = 20
"""

#: (options) of the tables compared: the default predicate with a tolerance ladder, and point sets
TABLE_OPTIONS = [["--tau", "0.01", "0.1"], ["--preset", "distortion"]]


@pytest.fixture(scope="module")
def stores(tmp_path_factory) -> list[Path]:
    """The audit campaign run from scratch twice: in-process, and on a pool of two workers."""
    folder = tmp_path_factory.mktemp("audit")
    spec = folder / "audit.toml"
    spec.write_text(AUDIT_SPEC, encoding="utf-8")
    paths = []
    for name, executor in (("first", ["--in-process"]), ("second", ["--workers", "2"])):
        assert main(["run", str(spec), "--out", str(folder / name), "--quiet", *executor]) == 0
        paths.append(folder / name / "audit.sqlite")
    return paths


def _tables(store: Path, options: list[str]) -> bytes:
    json_path, csv_path = store.with_suffix(".json"), store.with_suffix(".csv")
    assert main(["tables", str(store), "--json", str(json_path), "--csv", str(csv_path), *options]) == 0
    return json_path.read_bytes() + b"\n--\n" + csv_path.read_bytes()


@pytest.mark.parametrize("options", TABLE_OPTIONS, ids=["bound-ladder", "distortion"])
def test_two_runs_from_scratch_give_byte_identical_tables(stores, options, capsys):
    first, second = (_tables(store, options) for store in stores)
    capsys.readouterr()
    assert first == second
    assert b'"entries": []' not in first  # the tables hold results, not just empty shells


def _metrics(store: Path) -> dict:
    from calib.sweep.rerun import TIMING_FIELDS

    with sqlite3.connect(store) as db:
        rows = db.execute("SELECT trial_id, retrieval, status, message, metrics, k_label, stream_key FROM trials").fetchall()
        originals = db.execute("SELECT instance_id, orig_status, orig_objective, orig_iterations, orig_x FROM instances").fetchall()
    db.close()
    trials = {(trial, retrieval): (status, message, label, key, {name: value for name, value in json.loads(metrics).items()
                                                                 if name not in TIMING_FIELDS})
              for trial, retrieval, status, message, metrics, label, key in rows}
    return {"trials": trials, "originals": sorted(originals)}


def test_two_runs_store_the_same_numbers_timings_aside(stores):
    first, second = (_metrics(store) for store in stores)
    kinds = {status for status, *_ in first["trials"].values()}
    assert kinds == {"ok"} and len(first["trials"]) == 120
    assert first == second


def _sample(store: Path) -> list[str]:
    """One trial per family and two more, drawn with a fixed seed from the sorted trial ids."""
    with sqlite3.connect(store) as db:
        rows = db.execute("SELECT DISTINCT t.trial_id, i.family FROM trials t JOIN instances i USING (instance_id) "
                          "ORDER BY t.trial_id").fetchall()
    db.close()
    rng = np.random.default_rng(20261201)
    by_family: dict = {}
    for trial, family in rows:
        by_family.setdefault(family, []).append(trial)
    chosen = [str(rng.choice(ids)) for _, ids in sorted(by_family.items())]
    rest = [trial for trial, _ in rows if trial not in chosen]
    return chosen + [str(trial) for trial in rng.choice(rest, 2, replace=False)]


def test_rerun_reproduces_a_random_sample_of_stored_trials(stores, capsys):
    sample = _sample(stores[1])
    assert len(sample) == 6
    for trial in sample:
        assert main(["rerun", str(stores[1]), trial]) == 0, capsys.readouterr().out
        out = capsys.readouterr().out
        assert out.rstrip().endswith("result: identical except timings") and "DIFFERENT" not in out
