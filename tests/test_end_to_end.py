"""A tiny spec through the CLI to a table; a second run resumes with nothing to do."""

import json
import subprocess
import sys

from calib.cli import main

SPEC = """
[campaign]
name = "tiny"
root_seed = 5
replicates = 4

[[families]]
name = "lp-planted"
sizes = [{rows = 30, cols = 60}]
instances = 2
params = {rank = 4, cost = "nonnegative"}

[sweep]
projectors = ["gaussian"]
k = [2, 4, 8]
"""


def test_spec_to_table_and_idempotent_rerun(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(SPEC)
    out = tmp_path / "out"
    assert main(["run", str(spec), "--out", str(out), "--quiet"]) == 0
    store = out / "tiny.sqlite"
    table1, table2 = tmp_path / "t1.json", tmp_path / "t2.json"
    # the gap reading (`bound`): the statement below is about the projected optimum
    assert main(["tables", str(store), "--preset", "bound", "--json", str(table1), "--csv", str(tmp_path / "t1.csv")]) == 0
    capsys.readouterr()

    assert main(["run", str(spec), "--out", str(out), "--quiet"]) == 0
    assert "0 run" in capsys.readouterr().out
    assert main(["tables", str(store), "--preset", "bound", "--json", str(table2)]) == 0
    assert table1.read_bytes() == table2.read_bytes()

    table = json.loads(table1.read_text())
    (entry,) = table["analyses"][0]["entries"]
    assert [point["trials"] for point in entry["grid"]] == [8, 8, 8]
    # rank-4 rows: k >= 4 keeps the LP exactly (see test_lp_core), k = 2 cannot
    assert [point["successes"] for point in entry["grid"]] == [0, 8, 8]
    assert "not a proof" in table["notice"]


def test_changed_spec_under_same_name_is_refused(tmp_path, capsys):
    spec = tmp_path / "tiny.toml"
    spec.write_text(SPEC)
    assert main(["run", str(spec), "--out", str(tmp_path), "--quiet"]) == 0
    spec.write_text(SPEC.replace("root_seed = 5", "root_seed = 6"))  # would change every stored trial
    before = (tmp_path / "tiny.sqlite").read_bytes()
    assert main(["run", str(spec), "--out", str(tmp_path), "--quiet"]) == 2
    assert "different spec" in capsys.readouterr().err
    assert (tmp_path / "tiny.sqlite").read_bytes() == before


def test_bad_spec_exits_2_with_one_line_and_no_traceback(tmp_path):
    spec = tmp_path / "bad.toml"
    spec.write_text(SPEC.replace('"gaussian"', '"gausian"').replace("k = [2, 4, 8]", "k = [0, 4]"))
    done = subprocess.run([sys.executable, "-m", "calib", "run", str(spec), "--out", str(tmp_path)],
                          capture_output=True, text=True)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1
    assert "sweep.projectors[0]" in lines[0] and "sweep.k[0]" in lines[0]
