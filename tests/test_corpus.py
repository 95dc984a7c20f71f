"""The malformed-input corpus: every bad spec, instance file, table, store or CLI value gets one line.

The error contract (docs/robustness.md): a bad input gives exactly one line on stderr,
``calib: error: WHERE: PROBLEM (FIX)``, naming the file or field and the fix, exit code 2, no
traceback, nothing on stdout, and a store already on disk keeps its bytes and rows. Exit status 2
for usage errors is common practice for command-line tools (Python's own argparse uses it).

The files live in ``tests/corpus/`` (specs, MPS files, saved instances, tables, misc);
``tests/corpus/make_corpus.py`` regenerates the binary ones. Damaged stores are made here, by one
SQL statement each on a copy of a real store. A representative subset runs through
``python -m calib`` in a subprocess, the rest through :func:`calib.cli.main`.
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from calib.cli import main

CORPUS = Path(__file__).with_name("corpus")
ROOT = Path(__file__).resolve().parents[1]
LINE = re.compile(r"^calib: error: .+\(.+\)$")  # where: problem (fix)

STORE_SPEC = """
[campaign]
name = "corpus-store"
root_seed = 7
replicates = 2

[[families]]
name = "lp-planted"
sizes = [{rows = 12, cols = 24}]

[sweep]
projectors = ["gaussian"]
k = [3, 6]

[solver]
time_limit_s = 20
"""

_PROBE = ["--k", "1", "--replicates", "1"]
_LOOKUP = ["--family", "lp-planted", "--n", "25", "--projector", "gaussian"]

#: (id, argv, fragments the one line must hold, through a subprocess?). Placeholders: {out} the
#: folder of a real store, {store} that store, {tmp} an empty folder. The working folder is tests/corpus.
CASES = [
    # --- sweep specs -----------------------------------------------------------------------
    ("spec-syntax-error", ["run", "specs/syntax_error.toml", "--out", "{out}"], ["specs/syntax_error.toml", "not valid TOML", "line 4"], True),
    ("spec-duplicate-key", ["run", "specs/duplicate_key.toml", "--out", "{out}"], ["specs/duplicate_key.toml", "not valid TOML"], False),
    ("spec-missing-seed", ["run", "specs/missing_seed.toml", "--out", "{out}"], ["campaign.root_seed: missing"], True),
    ("spec-negative-seed", ["run", "specs/negative_seed.toml", "--out", "{out}"], ["campaign.root_seed", ">= 0"], False),
    ("spec-seed-wrong-type", ["run", "specs/seed_wrong_type.toml", "--out", "{out}"], ["campaign.root_seed", "integer"], False),
    ("spec-name-traversal", ["run", "specs/name_traversal.toml", "--out", "{out}"], ["campaign.name", "../../etc/evil"], True),
    ("spec-name-absolute", ["run", "specs/name_absolute.toml", "--out", "{out}"], ["campaign.name", "/tmp/evil"], False),
    ("spec-replicates-zero", ["run", "specs/replicates_zero.toml", "--out", "{out}"], ["campaign.replicates", ">= 1"], False),
    ("spec-unknown-family", ["run", "specs/unknown_family.toml", "--out", "{out}"], ["families[0].name", "unknown family 'lp-plantd'"], False),
    ("spec-unknown-key", ["run", "specs/unknown_key.toml", "--out", "{out}"], ["sweep.projector", "unknown key"], False),
    ("spec-unknown-projector", ["run", "specs/unknown_projector.toml", "--out", "{out}"], ["sweep.projectors[0]", "unknown projector"], False),
    ("spec-duplicate-projector", ["run", "specs/duplicate_projector.toml", "--out", "{out}"], ["sweep.projectors[2]", "duplicate"], False),
    ("spec-duplicate-size", ["run", "specs/duplicate_size.toml", "--out", "{out}"], ["families[0].sizes[1]", "duplicate"], False),
    ("spec-k-zero", ["run", "specs/k_zero.toml", "--out", "{out}"], ["sweep.k[0]", "invalid value 0", "integers >= 1"], True),
    ("spec-k-negative", ["run", "specs/k_negative.toml", "--out", "{out}"], ["sweep.k[0]", "invalid value -4"], False),
    ("spec-k-not-integer", ["run", "specs/k_not_integer.toml", "--out", "{out}"], ["sweep.k[1]", "4.5"], False),
    ("spec-k-duplicate", ["run", "specs/k_duplicate.toml", "--out", "{out}"], ["sweep.k", "duplicate"], False),
    ("spec-impossible-grid", ["run", "specs/k_above_every_size.toml", "--out", "{out}"], ["families[0].sizes[0]", "no k of the grid fits"], False),
    ("spec-eps-one", ["run", "specs/eps_one.toml", "--out", "{out}"], ["sweep.k.eps[1]", "(0, 1)"], True),
    ("spec-eps-negative", ["run", "specs/eps_negative.toml", "--out", "{out}"], ["sweep.k.eps[0]", "-0.2"], False),
    ("spec-eps-unknown-rule", ["run", "specs/eps_unknown_rule.toml", "--out", "{out}"], ["sweep.k.rule", "made-up"], False),
    ("spec-fraction-above-one", ["run", "specs/fraction_above_one.toml", "--out", "{out}"], ["sweep.k.fractions[1]", "(0, 1]"], False),
    ("spec-fraction-zero", ["run", "specs/fraction_zero.toml", "--out", "{out}"], ["sweep.k.fractions[0]", "0.0"], False),
    ("spec-k-wrong-type", ["run", "specs/k_wrong_type.toml", "--out", "{out}"], ["sweep.k", "cannot read 'sixteen'"], False),
    ("spec-sizes-wrong-type", ["run", "specs/sizes_wrong_type.toml", "--out", "{out}"], ["families[0].sizes", "missing or empty"], False),
    ("spec-rows-zero", ["run", "specs/rows_zero.toml", "--out", "{out}"], ["families[0].sizes[0].rows", ">= 1"], False),
    ("spec-rows-wrong-type", ["run", "specs/rows_wrong_type.toml", "--out", "{out}"], ["families[0].sizes[0].rows", "'twelve'"], False),
    ("spec-unknown-param", ["run", "specs/unknown_param.toml", "--out", "{out}"], ["families[0].sizes[0]", "unknown parameter 'colour'"], False),
    ("spec-time-limit-negative", ["run", "specs/time_limit_negative.toml", "--out", "{out}"], ["solver.time_limit_s", "positive"], False),
    ("spec-time-limit-infinite", ["run", "specs/time_limit_infinite.toml", "--out", "{out}"], ["solver.time_limit_s", "inf"], False),
    ("spec-highs-reserved", ["run", "specs/highs_reserved_option.toml", "--out", "{out}"], ["solver.highs.threads", "set by calib"], False),
    ("spec-highs-unknown", ["run", "specs/highs_unknown_option.toml", "--out", "{out}"], ["solver.highs.no_such_option", "HiGHS rejects"], False),
    ("spec-unknown-retrieval", ["run", "specs/unknown_retrieval.toml", "--out", "{out}"], ["sweep.retrievals[0]", "basis-lstsqq"], False),
    ("spec-projector-bad-option", ["run", "specs/projector_bad_option.toml", "--out", "{out}"], ["sweep.projectors[0]", "s: must be an integer"], False),
    ("spec-empty-file", ["run", "specs/empty.toml", "--out", "{out}"], ["specs/empty.toml", "campaign: missing table"], False),
    ("spec-mps-dir-missing-folder", ["run", "specs/mps_dir_missing_folder.toml", "--out", "{out}"], ["families[0].sizes[0]: no/such/folder", "no such folder"], False),
    ("spec-mps-dir-truncated-file", ["run", "specs/mps_dir_truncated_file.toml", "--out", "{out}"], ["families[0].sizes[0]: mps/truncated.mps", "ENDATA"], False),
    ("spec-changed-under-same-name", ["run", "specs/changed_spec_same_name.toml", "--out", "{out}"], ["corpus-store.sqlite", "different spec", "root_seed", "--new-campaign"], True),
    ("spec-missing-file", ["run", "specs/no_such_spec.toml", "--out", "{out}"], ["specs/no_such_spec.toml", "no such spec file"], False),
    # --- MPS files (calib probe) -------------------------------------------------------------
    ("mps-truncated", ["probe", "mps/truncated.mps", *_PROBE], ["mps/truncated.mps", "line 9", "ENDATA"], True),
    ("mps-nan-cost", ["probe", "mps/nan_cost.mps", *_PROBE], ["mps/nan_cost.mps", "line 9", "NaN"], False),
    ("mps-inf-coefficient", ["probe", "mps/inf_coefficient.mps", *_PROBE], ["mps/inf_coefficient.mps", "line 10", "infinite"], False),
    ("mps-nan-rhs", ["probe", "mps/nan_rhs.mps", *_PROBE], ["mps/nan_rhs.mps", "line 16", "NaN"], False),
    ("mps-undeclared-row", ["probe", "mps/undeclared_row.mps", *_PROBE], ["mps/undeclared_row.mps", "row 'r7' is not declared"], False),
    ("mps-not-a-number", ["probe", "mps/not_a_number.mps", *_PROBE], ["mps/not_a_number.mps", "'1,5' is not a number"], False),
    ("mps-empty-problem", ["probe", "mps/no_rows.mps", *_PROBE], ["mps/no_rows.mps", "no rows or no columns"], False),
    ("mps-empty-file", ["probe", "mps/empty_file.mps", *_PROBE], ["mps/empty_file.mps", "empty"], False),
    ("mps-binary", ["probe", "mps/binary.mps", *_PROBE], ["mps/binary.mps", "not an MPS file"], False),
    ("mps-crossed-bounds", ["probe", "mps/crossed_bounds.mps", *_PROBE], ["mps/crossed_bounds.mps", "lower bound exceeds"], False),
    ("mps-integer-variables", ["probe", "mps/integer_variables.mps", *_PROBE], ["mps/integer_variables.mps", "integer variables"], False),
    ("mps-missing", ["probe", "mps/no_such_model.mps", *_PROBE], ["mps/no_such_model.mps", "no such MPS file"], False),
    # --- saved instances (manifest + MPS + npz) ----------------------------------------------
    ("npz-nan", ["probe", "instances/npz_nan/inst.json", *_PROBE], ["npz_nan/inst.info.npz", "'planted_x' contains NaN"], True),
    ("npz-inf", ["probe", "instances/npz_inf/inst.json", *_PROBE], ["npz_inf/inst.info.npz", "infinite"], False),
    ("npz-inconsistent-sparse", ["probe", "instances/npz_inconsistent_sparse/inst.json", *_PROBE], ["inst.info.npz", "sparse matrix 'M' is inconsistent"], False),
    ("npz-missing-member", ["probe", "instances/npz_missing_member/inst.json", *_PROBE], ["inst.info.npz", "sparse matrix 'M'"], False),
    ("npz-header-without-sparse", ["probe", "instances/npz_header_without_sparse/inst.json", *_PROBE], ["inst.info.npz", "'sparse' list"], False),
    ("npz-pickled-object", ["probe", "instances/npz_pickled_object/inst.json", *_PROBE], ["inst.info.npz", "allow_pickle=False"], False),
    ("manifest-path-escape", ["probe", "instances/manifest_path_escape/inst.json", *_PROBE], ["inst.json: data", "not a file name in the manifest's own folder"], False),
    ("manifest-bad-params", ["probe", "instances/manifest_bad_params/inst.json", *_PROBE], ["inst.json: params.rows", "'six'"], False),
    ("manifest-wrong-index-type", ["probe", "instances/manifest_wrong_index_type/inst.json", *_PROBE], ["inst.json: index", "wrong type"], False),
    ("manifest-tampered-mps", ["probe", "instances/manifest_tampered_mps/inst.json", *_PROBE], ["inst.mps", "checksum differs"], False),
    ("manifest-not-json", ["probe", "instances/manifest_not_json/inst.json", *_PROBE], ["inst.json", "not a readable JSON manifest"], False),
    # --- safe-k tables (calib lookup) --------------------------------------------------------
    ("table-not-json", ["lookup", "tables/not_json.json", *_LOOKUP], ["tables/not_json.json", "is not JSON"], True),
    ("table-truncated", ["lookup", "tables/truncated.json", *_LOOKUP], ["tables/truncated.json", "is not JSON"], False),
    ("table-wrong-version", ["lookup", "tables/wrong_version.json", *_LOOKUP], ["tables/wrong_version.json", "format version 1"], False),
    ("table-wrong-format", ["lookup", "tables/wrong_format.json", *_LOOKUP], ["tables/wrong_format.json", "not a calib safe-k table"], False),
    ("table-tampered-value", ["lookup", "tables/tampered_value.json", *_LOOKUP], ["tables/tampered_value.json", "checksum mismatch"], True),
    ("table-schema-violation", ["lookup", "tables/schema_violation.json", *_LOOKUP], ["tables/schema_violation.json", "'notice' is a required property"], False),
    ("table-missing", ["lookup", "tables/no_such_table.json", *_LOOKUP], ["tables/no_such_table.json", "no such table file"], False),
    # --- CLI values ----------------------------------------------------------------------------
    ("cli-workers-zero", ["run", "misc/bom_spec.toml", "--out", "{out}", "--workers", "0"], ["--workers", "got 0"], True),
    ("cli-workers-negative", ["run", "misc/bom_spec.toml", "--out", "{out}", "--workers", "-3"], ["--workers", "got -3"], False),
    ("cli-workers-absurd", ["run", "misc/bom_spec.toml", "--out", "{out}", "--workers", "100000"], ["--workers", "got 100000"], False),
    ("cli-workers-not-int", ["run", "misc/bom_spec.toml", "--out", "{out}", "--workers", "many"], ["--workers", "invalid int value"], False),
    ("cli-scheduler-garbage", ["run", "misc/bom_spec.toml", "--out", "{out}", "--scheduler", "garbage"], ["--scheduler", "tcp://HOST:PORT"], True),
    ("cli-out-is-a-file", ["run", "misc/bom_spec.toml", "--out", "misc/not_sqlite.sqlite"], ["--out misc/not_sqlite.sqlite", "not a folder"], False),
    ("cli-probe-k-zero", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--k", "0"], ["--k", "got 0"], True),
    ("cli-probe-k-negative", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--k", "-2"], ["--k", "got -2"], False),
    ("cli-probe-k-above-m", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--k", "13"], ["--k", "1..12"], False),
    ("cli-probe-unknown-projector", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--projector", "gausian"], ["--projector", "unknown projector 'gausian'"], False),
    ("cli-probe-eps-above-one", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--eps", "1.5"], ["--eps", "(0, 1)"], False),
    ("cli-probe-eps-nan", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--eps", "nan"], ["--eps", "nan"], False),
    ("cli-probe-bad-param", ["probe", "lp-planted", "--param", "rows=x", "--param", "cols=24"], ["--param.rows", "'x'"], False),
    ("cli-probe-json-is-folder", ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--json", "{tmp}"], ["--json", "is a folder"], False),
    ("cli-bounds-n-one", ["bounds", "--n", "1", "--eps", "0.5"], ["--n", "at least 2 points"], False),
    ("cli-bounds-k-zero", ["bounds", "--n", "10", "--k", "0"], ["--k", "got 0"], False),
    ("cli-bounds-k-huge", ["bounds", "--n", "10", "--k", str(10**30)], ["--k", "2**53"], False),
    ("cli-bounds-eps-one", ["bounds", "--n", "10", "--eps", "1"], ["--eps", "(0, 1)"], False),
    ("cli-tables-eps", ["tables", "{store}", "--eps", "1.5"], ["--eps", "(0, 1)"], False),
    ("cli-tables-delta", ["tables", "{store}", "--delta", "0"], ["--delta", "(0, 1)"], False),
    ("cli-tables-negative-tolerance", ["tables", "{store}", "--tol-gap", "-1"], ["--tol-gap", "positive"], False),
    ("cli-tables-json-is-folder", ["tables", "{store}", "--json", "{tmp}"], ["--json", "is a folder"], False),
    ("cli-tables-json-unwritable", ["tables", "{store}", "--json", "/proc/calib-no-such-folder/t.json"], ["--json /proc/calib-no-such-folder/t.json", "cannot write"], False),
    ("cli-store-not-sqlite", ["tables", "misc/not_sqlite.sqlite"], ["misc/not_sqlite.sqlite", "not a calib store"], True),
    ("cli-store-missing", ["tables", "misc/no_such_store.sqlite"], ["misc/no_such_store.sqlite", "no such store"], False),
    ("cli-export-not-sqlite", ["export", "misc/not_sqlite.sqlite", "--csv", "{tmp}/rows.csv"], ["misc/not_sqlite.sqlite", "not a calib store"], False),
    ("cli-export-no-target", ["export", "{store}"], ["calib export", "--csv FILE"], False),
    ("cli-export-csv-is-folder", ["export", "{store}", "--csv", "{tmp}"], ["--csv", "is a folder"], False),
    ("cli-report-html-is-folder", ["report", "{store}", "--html", "{tmp}"], ["--html", "is a folder"], False),
    ("cli-rerun-unknown-trial", ["rerun", "{store}", "ffffffffffff"], ["TRIAL_ID", "no trial"], False),
    ("cli-lookup-k-zero", ["lookup", "tables/valid.json", *_LOOKUP, "--k", "0"], ["--k", "got 0"], False),
    ("cli-lookup-unknown-projector", ["lookup", "tables/valid.json", "--family", "lp-planted", "--n", "25", "--projector", "srht"], ["projector 'srht'"], False),
    ("cli-families-unknown", ["families", "lp-plantd"], ["calib families NAME", "unknown family"], False),
]

#: damaged copies of a real store: (id, SQL applied to the copy, argv with {copy}, fragments)
DAMAGED = [
    ("store-metrics-not-json", "UPDATE trials SET metrics = 'garbage' WHERE rowid = 1", ["tables", "{copy}"], ["its metrics are not a JSON object"]),
    ("store-instance-missing", "DELETE FROM instances", ["tables", "{copy}"], ["names an instance that is not stored"]),
    ("store-k-not-integer", "UPDATE trials SET k = 'abc' WHERE rowid = 1", ["tables", "{copy}"], ["has k = 'abc'"]),
    ("store-no-trials-table", "DROP TABLE trials", ["tables", "{copy}"], ["no table 'trials'"]),
    ("store-no-rows", "DELETE FROM trials", ["tables", "{copy}"], ["no trial rows yet"]),
    ("store-spec-not-json", "UPDATE campaign SET value = '{bad' WHERE key = 'spec'", ["report", "{copy}", "--html", "{tmp}/r.html"], ["stored spec is not a JSON object"]),
    ("store-root-seed-not-int", "UPDATE campaign SET value = 'x' WHERE key = 'root_seed'", ["tables", "{copy}"], ["root_seed = 'x'"]),
    ("store-newer-format", "UPDATE campaign SET value = '99' WHERE key = 'store_format'", ["run", "{spec}", "--out", "{folder}", "--in-process"], ["store format 99"]),
    ("store-unlisted-plugin", "INSERT OR REPLACE INTO campaign VALUES ('plugins', 'antigravity')", ["rerun", "{copy}", "{trial}"], ["antigravity", "CALIB_PLUGINS"]),
    ("store-solver-options-damaged", "UPDATE trials SET solver_options = '{}'", ["rerun", "{copy}", "{trial}"], ["cannot be rebuilt", "time_limit_s"]),
]


def _fingerprint(store: Path) -> tuple[str, list]:
    """(sha256 of the store file's bytes, every trial and instance row), read without writing."""
    connection = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
    try:
        rows = connection.execute("SELECT * FROM trials ORDER BY trial_id, retrieval").fetchall()
        rows += connection.execute("SELECT instance_id, orig_status, orig_objective FROM instances ORDER BY 1").fetchall()
    finally:
        connection.close()
    return hashlib.sha256(store.read_bytes()).hexdigest(), rows


@pytest.fixture(scope="module")
def store(tmp_path_factory) -> Path:
    """A real campaign store (4 trials), the one every case must leave untouched."""
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec

    folder = tmp_path_factory.mktemp("corpus-store")
    spec = folder / "corpus-store.toml"
    spec.write_text(textwrap.dedent(STORE_SPEC), encoding="utf-8")
    summary = run_campaign(load_spec(spec), folder / "out", inline=True)
    assert summary.statuses == {"ok": 4}
    return summary.store_path


def _main(argv: list[str]) -> int:
    """:func:`calib.cli.main`, with argparse's own exit (bad option syntax) read as its code."""
    try:
        return main(argv)
    except SystemExit as stop:
        return stop.code


def _argv(argv: list[str], **places) -> list[str]:
    return [item.format(**places) for item in argv]


def _check(code: int, out: str, err: str, fragments: list[str]) -> None:
    assert code == 2, (code, err)
    assert "Traceback" not in err and out == "", (out, err)
    lines = err.splitlines()
    assert len(lines) == 1 and err.endswith("\n"), err  # exactly one line
    assert LINE.match(lines[0]), lines[0]  # calib: error: where: problem (fix)
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])


def _run_subprocess(argv: list[str]) -> tuple[int, str, str]:
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    env.pop("CALIB_PLUGINS", None)
    done = subprocess.run([sys.executable, "-m", "calib", *argv], cwd=CORPUS, env=env, capture_output=True, text=True, timeout=120)
    return done.returncode, done.stdout, done.stderr


@pytest.mark.parametrize("case_id, argv, fragments, through_subprocess", CASES, ids=[case[0] for case in CASES])
def test_malformed_input_gives_one_line_exit_2_and_leaves_the_store_alone(case_id, argv, fragments, through_subprocess,
                                                                          store, tmp_path, monkeypatch, capsys):
    monkeypatch.delenv("CALIB_PLUGINS", raising=False)
    before = _fingerprint(store)
    argv = _argv(argv, out=store.parent, store=store, tmp=tmp_path)
    if through_subprocess:
        code, out, err = _run_subprocess(argv)
    else:
        monkeypatch.chdir(CORPUS)
        code = _main(argv)
        out, err = capsys.readouterr()
    _check(code, out, err, fragments)
    assert _fingerprint(store) == before


@pytest.mark.parametrize("case_id, sql, argv, fragments", DAMAGED, ids=[case[0] for case in DAMAGED])
def test_damaged_store_gives_one_line_and_is_not_written(case_id, sql, argv, fragments, store, tmp_path, monkeypatch, capsys):
    monkeypatch.delenv("CALIB_PLUGINS", raising=False)
    folder = tmp_path / "damaged"
    folder.mkdir()
    copy = folder / store.name
    shutil.copyfile(store, copy)
    with sqlite3.connect(copy) as connection:
        trial = connection.execute("SELECT trial_id FROM trials ORDER BY trial_id").fetchone()
        connection.execute(sql)
    connection.close()
    spec = tmp_path / "corpus-store.toml"
    spec.write_text(textwrap.dedent(STORE_SPEC), encoding="utf-8")
    damaged = hashlib.sha256(copy.read_bytes()).hexdigest()
    code = _main(_argv(argv, copy=copy, tmp=tmp_path, spec=spec, folder=folder, trial=trial[0] if trial else "x"))
    out, err = capsys.readouterr()
    _check(code, out, err, [str(copy), *fragments])
    assert hashlib.sha256(copy.read_bytes()).hexdigest() == damaged


def test_the_corpus_is_large_enough_and_its_controls_are_valid(tmp_path, monkeypatch, capsys):
    # the corpus must stay >= 30 inputs; and the valid files next to the broken ones must pass,
    # so each broken case fails on its own flaw and not on a stale fixture
    assert len(CASES) + len(DAMAGED) >= 30
    monkeypatch.chdir(CORPUS)
    assert main(["lookup", "tables/valid.json", *_LOOKUP]) == 0
    assert main(["probe", "instances/valid/inst.json", *_PROBE]) == 0
    assert main(["run", "misc/bom_spec.toml", "--out", str(tmp_path), "--dry-run", "--no-probe"]) == 0  # a BOM is fine
    assert "corpus-bom" in capsys.readouterr().out


def test_every_corpus_file_is_used_by_a_case():
    named = " ".join(" ".join(argv) for _, argv, *_ in CASES)
    files = [path.relative_to(CORPUS).as_posix() for path in CORPUS.rglob("*") if path.is_file()]
    controls = {"make_corpus.py", "tables/valid.json", "mps/unbounded.mps"}
    unused = [name for name in files if name not in controls and not name.startswith("instances/")
              and name not in named]
    folders = {path.name for path in (CORPUS / "instances").iterdir()} - {"valid"}
    unused += sorted(folder for folder in folders if f"instances/{folder}/" not in named)
    assert not unused, unused


UNBOUNDED_SPEC = """
[campaign]
name = "unbounded"
root_seed = 3
replicates = 3

[[families]]
name = "mps-dir"
sizes = [{{dir = "{mps}", name = "unbounded.mps"}}]

[[families]]
name = "lp-planted"
sizes = [{{rows = 4, cols = 8}}]

[sweep]
projectors = ["gaussian"]
k = [2, 4]
"""


def test_an_unbounded_original_is_a_result_row_and_left_out_of_the_table(tmp_path, capsys):
    # min -x0 with x0 - x1 = 1 and x >= 0 has no finite optimum (x0 = 1 + x1 grows without end): the
    # solver's verdict is a result, stored like any other; a row projection keeps the ray, so every
    # projected LP is unbounded too and those trials say nothing about k: the table leaves them out
    import json

    spec = tmp_path / "unbounded.toml"
    spec.write_text(UNBOUNDED_SPEC.format(mps=(CORPUS / "mps").as_posix()), encoding="utf-8")
    assert main(["run", str(spec), "--out", str(tmp_path), "--in-process", "--quiet"]) == 0
    store = tmp_path / "unbounded.sqlite"
    with sqlite3.connect(store) as db:
        original = db.execute("SELECT orig_status, orig_objective FROM instances WHERE family = 'mps-dir'").fetchone()
        rows = db.execute("SELECT t.status, t.metrics FROM trials t JOIN instances i USING (instance_id) "
                          "WHERE i.family = 'mps-dir'").fetchall()
    db.close()
    assert original == ("unbounded", None)
    assert len(rows) == 6 and all(status == "ok" and json.loads(metrics)["proj_status"] == "unbounded" for status, metrics in rows)
    capsys.readouterr()
    assert main(["tables", str(store), "--json", str(tmp_path / "t.json")]) == 0
    analysis = json.loads((tmp_path / "t.json").read_text())["analyses"][0]
    assert [entry["family"] for entry in analysis["entries"]] == ["lp-planted"]
    (excluded,) = analysis["excluded"]
    assert excluded["family"] == "mps-dir" and "1 instance(s) with an original that is unbounded (6 rows)" in excluded["reason"]
    assert "left out mps-dir" in capsys.readouterr().out
    assert main(["probe", str(CORPUS / "mps" / "unbounded.mps"), "--k", "2", "--replicates", "1"]) == 0
    assert "original: unbounded" in capsys.readouterr().out
