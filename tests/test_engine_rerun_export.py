"""``calib rerun`` reproduces stored trials; ``calib export`` writes what the store holds; old stores
are migrated.

The export is checked against the store read independently with the standard library (sqlite3 and
json), and the Parquet file against the CSV through pyarrow, an outside reader.
"""

from __future__ import annotations

import json
import re
import shutil
import sqlite3
from pathlib import Path

import pandas as pd
import pytest
from engine_faults import fault_plugin  # noqa: F401  (fixture)
from engine_helpers import table_bytes, write_spec

from calib.cli import main
from calib.metrics import FIELDS
from calib.store.schema import STORE_FORMAT
from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    folder = tmp_path_factory.mktemp("campaign")
    spec_path = write_spec(folder, replicates=2)
    summary = run_campaign(load_spec(spec_path), folder / "out", workers=2)
    return spec_path, summary.store_path


def _trial_ids(store) -> list[str]:
    with sqlite3.connect(store) as db:
        return [row[0] for row in db.execute("SELECT trial_id FROM trials ORDER BY trial_id")]


def test_rerun_reproduces_a_trial_exactly(campaign, capsys):
    _, store = campaign
    trial_id = _trial_ids(store)[7]
    assert main(["rerun", str(store), trial_id[:8]]) == 0
    out = capsys.readouterr().out
    assert f"trial {trial_id}" in out and "result: identical except timings" in out and "DIFFERENT" not in out
    assert "orig_x" in out and "proj_objective" in out


def test_rerun_flags_a_tampered_row(campaign, tmp_path, capsys):
    _, store = campaign
    copy = tmp_path / "copy.sqlite"
    shutil.copy(store, copy)
    trial_id = _trial_ids(copy)[3]
    with sqlite3.connect(copy) as db:
        metrics = json.loads(db.execute("SELECT metrics FROM trials WHERE trial_id = ?", (trial_id,)).fetchone()[0])
        metrics["proj_iterations"] += 1
        db.execute("UPDATE trials SET metrics = ? WHERE trial_id = ?", (json.dumps(metrics), trial_id))
    assert main(["rerun", str(copy), trial_id]) == 1
    line = next(line for line in capsys.readouterr().out.splitlines() if line.strip().startswith("proj_iterations"))
    assert line.endswith("DIFFERENT")


def test_rerun_of_an_unknown_trial_is_a_user_error(campaign, capsys):
    _, store = campaign
    assert main(["rerun", str(store), "ffffffffffff"]) == 2
    assert "no trial" in capsys.readouterr().err


def test_rerun_reproduces_a_failing_trial(tmp_path, fault_plugin, monkeypatch, capsys):
    from test_engine_executors import FAULTY_SPEC

    text = FAULTY_SPEC.replace("k = [1, 2, 3, 4, 6]", "k = [1, 4]").replace(
        '[[families]]\nname = "test-faulty-lp"\nsizes = [{{rows = 14, cols = 28}}]\nparams = {{original = "segfault"}}\n', "")
    summary = run_campaign(load_spec(write_spec(tmp_path, "faulty", replicates=1, text=text)), tmp_path / "out", inline=True)
    with sqlite3.connect(summary.store_path) as db:
        trial_id = db.execute("SELECT trial_id FROM trials WHERE status = 'error'").fetchone()[0]
    # the store remembers its plugins, but imports them only with the user's consent (CALIB_PLUGINS):
    # a store is data, and the module names it holds are never imported on its word alone
    monkeypatch.delenv("CALIB_PLUGINS")
    assert main(["rerun", str(summary.store_path), trial_id]) == 2
    assert "CALIB_PLUGINS=engine_fault_plugin" in capsys.readouterr().err
    monkeypatch.setenv("CALIB_PLUGINS", fault_plugin)
    assert main(["rerun", str(summary.store_path), trial_id]) == 0
    assert "RuntimeError: injected failure" in capsys.readouterr().out


def test_export_csv_and_parquet_hold_every_row_and_metric(campaign, tmp_path, capsys):
    _, store = campaign
    csv_path, parquet_path = tmp_path / "rows.csv", tmp_path / "rows.parquet"
    assert main(["export", str(store), "--csv", str(csv_path), "--parquet", str(parquet_path)]) == 0
    frame = pd.read_csv(csv_path)
    with sqlite3.connect(store) as db:
        stored = db.execute("SELECT trial_id, retrieval, status, metrics FROM trials ORDER BY trial_id, retrieval").fetchall()
    assert len(frame) == len(stored) == 60
    assert list(frame["trial_id"]) == [row[0] for row in stored]
    for (_, _, status, metrics), (_, line) in zip(stored, frame.iterrows()):
        record = json.loads(metrics)
        assert line["status"] == status
        for name in ("proj_iterations", "proj_objective", "orig_objective"):
            if record[name] is None:
                assert pd.isna(line[name])
            else:
                assert line[name] == record[name]  # CSV keeps 17 significant digits: exact floats
    parquet = pd.read_parquet(parquet_path, engine="pyarrow")
    assert list(parquet.columns) == list(frame.columns)
    assert parquet["trial_id"].tolist() == frame["trial_id"].tolist()
    assert parquet["proj_objective"].equals(frame["proj_objective"])
    assert {"stream_key", "root_seed", "solver_options", "env_versions"} <= set(frame.columns)


SPEC = Path(__file__).resolve().parents[1] / "docs" / "spec.md"


def _section(text: str, start: str, end: str) -> str:
    return text[text.index(start):text.index(end, text.index(start))]


def _metrics_table() -> dict:
    """field -> (unit, classes) of the metrics table of docs/spec.md."""
    table = _section(SPEC.read_text(encoding="utf-8"), "| field | meaning | unit | classes |", "`calib.metrics.FIELDS`")
    out = {}
    for line in table.splitlines()[2:]:
        if line.startswith("| `"):
            cells = [cell.strip() for cell in re.split(r"(?<!\\)\|", line)[1:-1]]
            out[cells[0].strip("`")] = (cells[-2], cells[-1])
    return out


def test_the_documented_metrics_table_is_the_metrics_list():
    # docs/spec.md is what users read: its metrics table must name every field of calib.metrics.FIELDS,
    # in the same order, with the same unit and classes
    documented = _metrics_table()
    assert list(documented) == list(FIELDS)
    assert documented == {name: (field.units, field.classes) for name, field in FIELDS.items()}


def test_every_exported_column_is_documented(campaign, tmp_path):
    # docs/spec.md documents the export's columns: the store's trial columns (its `trials` row), the
    # instance columns of "Exporting: calib export", the metrics table and env_versions
    _, store = campaign
    csv_path = tmp_path / "rows.csv"
    assert main(["export", str(store), "--csv", str(csv_path)]) == 0
    columns = list(pd.read_csv(csv_path, nrows=0).columns)
    text = SPEC.read_text(encoding="utf-8")
    trials_row = next(line for line in text.splitlines() if line.startswith("| `trials` |"))
    export = _section(text, "## Exporting: `calib export`", "## Plugins")
    documented = (set(re.findall(r"`([a-z_0-9]+)`", trials_row)) - {"trials", "metrics"}) | set(re.findall(r"`([a-z_0-9]+)`", export))
    assert set(FIELDS) <= set(columns)
    assert sorted(set(columns) - documented - set(_metrics_table())) == []


def test_export_without_a_target_is_a_user_error(campaign, capsys):
    assert main(["export", str(campaign[1])]) == 2


def test_a_format_1_store_is_migrated_and_resumed(campaign, tmp_path):
    spec_path, store = campaign
    old = tmp_path / "out" / "tiny.sqlite"
    old.parent.mkdir()
    shutil.copy(store, old)
    with sqlite3.connect(old) as db:  # rebuild the layout of store format 1
        db.execute("DELETE FROM trials WHERE replicate = 1")
        db.execute("ALTER TABLE trials DROP COLUMN root_seed")
        db.execute("ALTER TABLE trials DROP COLUMN solver_options")
        for column in ("baseline_method", "baseline_seconds", "methods"):  # format 3's instance columns
            db.execute(f"ALTER TABLE instances DROP COLUMN {column}")
        db.execute("DELETE FROM campaign WHERE key IN ('store_format', 'spec_name', 'plugins')")
    summary = run_campaign(load_spec(spec_path), old.parent, inline=True)
    assert (summary.skipped, summary.ran) == (30, 30)
    with sqlite3.connect(old) as db:
        assert db.execute("SELECT value FROM campaign WHERE key = 'store_format'").fetchone()[0] == str(STORE_FORMAT)
        assert db.execute("SELECT COUNT(*) FROM instances WHERE baseline_seconds IS NULL").fetchone()[0] > 0
        nulls = db.execute("SELECT COUNT(*) FROM trials WHERE root_seed IS NULL").fetchone()[0]
        old_trial = db.execute("SELECT trial_id FROM trials WHERE root_seed IS NULL LIMIT 1").fetchone()[0]
    assert nulls == 30
    assert table_bytes(old) == table_bytes(store)
    assert main(["rerun", str(old), old_trial]) == 0  # root seed from the stream key, solver from the spec
