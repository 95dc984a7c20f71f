"""Spec validation, expansion and the --dry-run report.

The checks follow the error contract of calib (README, "Errors"): every problem of a spec is
reported at once with its field path, the exit code is 2 and no traceback is printed. That
contract is a fact of the trade ("common practice" for command-line tools: exit status 2 for
usage errors, as Python's own argparse does).
"""

from __future__ import annotations

import sqlite3
import subprocess
import sys
import tomllib

import pytest
from engine_helpers import TINY_SPEC, write_spec
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calib.cli import main
from calib.errors import InputError
from calib.spec_problems import SpecError
from calib.sweep.expansion import count_trials, expand
from calib.sweep.spec import Spec, parse_spec

BAD_SPEC = """
[campaign]
name = "bad"
replicates = "ten"

[[families]]
name = "lp-nonexistent"
sizes = [{rows = 10, cols = 20}]

[[families]]
name = "lp-planted"
sizes = [{rows = 10, cols = 20}, {rows = 10, cols = 20}]
instances = 0

[sweep]
projectors = ["gaussian", "gaussian", "not-a-projector"]
k = [4, 0, -3]
retrievals = ["basis-lstsq", "no-such-retrieval"]

[solver]
time_limit_s = -1
trial_timeout_s = "soon"
"""

#: field path -> a word the message must contain
EXPECTED_PROBLEMS = {
    "campaign.root_seed": "missing",
    "campaign.replicates": "integer",
    "families[0].name": "unknown family",
    "families[1].instances": ">= 1",
    "families[1].sizes[1]": "duplicate",
    "sweep.projectors[1]": "duplicate",
    "sweep.projectors[2]": "unknown projector",
    "sweep.k[1]": "invalid value 0",
    "sweep.k[2]": "invalid value -3",
    "sweep.retrievals[1]": "unknown retrieval",
    "solver.time_limit_s": "positive",
    "solver.trial_timeout_s": "positive",
}


def _problems(text: str) -> dict:
    with pytest.raises(SpecError) as caught:
        parse_spec(tomllib.loads(text), source="test.toml")
    return {path: problem for path, problem, _ in caught.value.problems}


def test_every_problem_is_reported_with_its_field_path():
    problems = _problems(BAD_SPEC)
    for path, word in EXPECTED_PROBLEMS.items():
        assert path in problems, f"{path} not reported; got {sorted(problems)}"
        assert word in problems[path], (path, problems[path])


@pytest.mark.parametrize("k_text, path, word", [
    ("{fractions = [0.5, 1.5]}", "sweep.k.fractions[1]", "invalid value 1.5"),
    ("{fractions = [0.0]}", "sweep.k.fractions[0]", "invalid value 0.0"),
    ("{eps = [0.5, 1.0]}", "sweep.k.eps[1]", "invalid value 1.0"),
    ("{eps = [-0.1]}", "sweep.k.eps[0]", "invalid value -0.1"),
    ("{eps = [0.3], rule = \"made-up\"}", "sweep.k.rule", "unknown rule"),
    ("{eps = [0.3], rule = [1]}", "sweep.k.rule", "unknown rule"),
    ("\"sixteen\"", "sweep.k", "cannot read"),
    ("[4.5]", "sweep.k[0]", "invalid value 4.5"),
])
def test_k_grids_out_of_range_are_rejected(k_text, path, word):
    text = TINY_SPEC.format(name="k", replicates=1).replace("k = [2, 4, 6, 10, 16]", f"k = {k_text}")
    problems = _problems(text)
    assert word in problems[path], problems


def test_solver_options_are_checked_by_highs_itself():
    text = TINY_SPEC.format(name="h", replicates=1).replace(
        "time_limit_s = 20", 'time_limit_s = 20\nhighs = {presolve = "off", threads = 4, no_such_option = 1}')
    problems = _problems(text)
    assert "solver.highs.threads" in problems and "one solver thread" in problems["solver.highs.threads"]
    assert "solver.highs.no_such_option" in problems and "HiGHS rejects" in problems["solver.highs.no_such_option"]
    assert "solver.highs.presolve" not in problems


def test_cli_reports_all_problems_exit_2_no_traceback(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    spec.write_text(BAD_SPEC, encoding="utf-8")
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and err.count("\n") == 1  # one line
    for path in EXPECTED_PROBLEMS:
        assert path in err
    assert not (tmp_path / "out").exists()  # nothing was created


def test_subprocess_exit_code_is_2_without_traceback(tmp_path):
    spec = tmp_path / "bad.toml"
    spec.write_text(BAD_SPEC, encoding="utf-8")
    done = subprocess.run([sys.executable, "-m", "calib", "run", str(spec), "--out", str(tmp_path / "o"), "--dry-run"],
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr and "campaign.root_seed: missing" in done.stderr


def test_invalid_toml_is_one_line(tmp_path, capsys):
    spec = tmp_path / "broken.toml"
    spec.write_text("[campaign\nname = 1", encoding="utf-8")
    assert main(["run", str(spec), "--dry-run"]) == 2
    assert "not valid TOML" in capsys.readouterr().err


# values TOML can hold, nested a little: the validator must answer any of them with a SpecError
_scalars = st.one_of(st.integers(-5, 300), st.floats(-2, 2, allow_nan=False), st.booleans(), st.text(max_size=6),
                     st.sampled_from(["gaussian", "lp-planted", "basis-lstsq", "dasgupta-gupta"]))
_values = st.recursive(_scalars, lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
                       max_leaves=8)
_keys = st.sampled_from(["name", "root_seed", "replicates", "sizes", "instances", "params", "projectors", "k",
                         "retrievals", "time_limit_s", "trial_timeout_s", "rows", "cols", "fractions", "eps", "rule"])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.fixed_dictionaries({}, optional={
    "campaign": st.dictionaries(_keys, _values, max_size=4),
    "families": st.lists(st.dictionaries(_keys, _values, max_size=4), max_size=2) | _values,
    "sweep": st.dictionaries(_keys, _values, max_size=4),
    "solver": st.dictionaries(_keys, _values, max_size=3),
}))
def test_any_malformed_spec_gives_a_spec_error_not_a_crash(raw):
    # property-based check (hypothesis): validation either accepts the spec or raises InputError
    # listing field paths; any other exception would reach the user as a traceback
    try:
        spec = parse_spec(raw)
    except InputError as error:
        assert str(error)
    else:
        assert isinstance(spec, Spec)


def test_expansion_is_deterministic_and_counts_match(tmp_path):
    from calib.sweep.spec import load_spec

    spec = load_spec(write_spec(tmp_path))
    ids = [trial.trial_id for _, trials in expand(spec) for trial in trials]
    again = [trial.trial_id for _, trials in expand(load_spec(write_spec(tmp_path))) for trial in trials]
    assert ids == again and len(set(ids)) == len(ids)
    assert count_trials(spec) == (6, len(ids)) == (6, 6 * 5 * 4)


def test_dry_run_prints_counts_and_an_estimate_and_creates_nothing(tmp_path, capsys):
    spec = write_spec(tmp_path)
    out = tmp_path / "out"
    assert main(["run", str(spec), "--out", str(out), "--dry-run", "--workers", "2"]) == 0
    text = capsys.readouterr().out
    assert "6 instances, 120 trials" in text
    assert "lp-planted rows=20,cols=40: 2 instances x 1 projector x 5 k in 2..16 x 4 replicates = 40 trials" in text
    assert "CPU-seconds for the 120 trials left" in text and "on 2 workers" in text
    assert not out.exists()


def test_dry_run_counts_only_the_stored_trials_of_its_own_plan(tmp_path, capsys):
    # a store can hold trials a later spec does not plan (here: fewer replicates): they are not
    # counted as its own, and the work left is never negative
    out = tmp_path / "out"
    first = write_spec(tmp_path)
    assert main(["run", str(first), "--out", str(out), "--in-process", "--quiet"]) == 0
    text = first.read_text()
    assert main(["run", str(first), "--out", str(out), "--dry-run", "--workers", "2"]) == 0
    assert "resumes: 120 of its trials stored" in capsys.readouterr().out
    grown = tmp_path / "grown.toml"
    grown.write_text(text.replace("replicates = 4", "replicates = 5"))
    assert main(["run", str(grown), "--out", str(out), "--dry-run", "--workers", "2"]) == 0
    report = capsys.readouterr().out
    assert "6 instances, 150 trials" in report and "resumes: 120 of its trials stored" in report
    assert "for the 30 trials left" in report
    fewer = tmp_path / "fewer.toml"
    fewer.write_text(text.replace("replicates = 4", "replicates = 2"))
    assert main(["run", str(fewer), "--out", str(out), "--dry-run", "--workers", "2"]) == 0
    report = capsys.readouterr().out
    assert "6 instances, 60 trials" in report and "resumes: 60 of its trials stored" in report
    assert "for the 0 trials left" in report  # before: "-60 trials left", a negative work estimate


MIXED = """
[campaign]
name = "mixed"
root_seed = 3
replicates = 2

[[families]]
name = "lp-planted"
sizes = [{rows = 20, cols = 40}]
instances = 1

[[families]]
name = "lp-planted"
sizes = [{rows = 20, cols = 40}]
instances = 1
params = {density = 0.5}

[[families]]
name = "qp-random"
sizes = [{vars = 12, rows = 6}]
instances = 1

[sweep]
projectors = ["gaussian"]
k = [4, 50]
retrievals = ["basis-lstsq", "alternating", "lift"]
"""


def test_dry_run_announces_the_rows_a_run_writes_and_names_each_cell(tmp_path, capsys):
    # each kind runs its own retrievals (lp: basis-lstsq and alternating; qp: lift), so the rows are
    # counted per family, and the run must write exactly the rows the dry run announced
    spec = tmp_path / "mixed.toml"
    spec.write_text(MIXED)
    out = tmp_path / "out"
    assert main(["run", str(spec), "--out", str(out), "--dry-run", "--no-probe"]) == 0
    text = capsys.readouterr().out
    assert "3 instances, 6 trials (10 stored rows: one per trial and retrieval of its kind)" in text
    # two cells of one family and size that differ in a parameter get two lines, told apart by it
    assert "  lp-planted rows=20,cols=40 density=1.0: 1 instance x 1 projector x k=4 x 2 replicates = 2 trials x 2 retrievals = 4 rows" in text
    assert "  lp-planted rows=20,cols=40 density=0.5: 1 instance x" in text
    assert "  qp-random vars=12,rows=6: 1 instance x 1 projector x k=4 x 2 replicates = 2 trials x 1 retrieval = 2 rows" in text
    # k = 50 lies above both projected dimensions (20 rows; 12 variables): said, not dropped silently
    skipped = ["k = 50 skipped for lp-planted rows=20,cols=40 density=1.0: above its projected dimension 20",
               "k = 50 skipped for lp-planted rows=20,cols=40 density=0.5: above its projected dimension 20",
               "k = 50 skipped for qp-random vars=12,rows=6: above its projected dimension 12"]
    assert all(line in text for line in skipped)
    assert main(["run", str(spec), "--out", str(out), "--in-process", "--quiet"]) == 0
    summary = capsys.readouterr().out
    assert all(line in summary for line in skipped)
    with sqlite3.connect(out / "mixed.sqlite") as db:
        assert db.execute("SELECT COUNT(*) FROM trials").fetchone() == (10,)


def test_a_dense_lp_too_large_for_memory_is_refused_before_anything_is_built(tmp_path, capsys):
    # 10^6 x 2 * 10^6 float64 entries at 8 bytes each (IEEE 754 double) = 1.6e13 bytes = 14.6 TiB
    spec = tmp_path / "huge.toml"
    spec.write_text(HUGE)
    out = tmp_path / "out"
    for extra in (["--dry-run"], ["--dry-run", "--no-probe"], []):
        assert main(["run", str(spec), "--out", str(out), *extra]) == 2
        captured = capsys.readouterr()
        assert captured.out == "" and captured.err.count("\n") == 1
        assert captured.err.startswith("calib: error: lp-planted rows=1000000,cols=2000000: needs about 14.6 TiB to build")
        assert not out.exists()


HUGE = """
[campaign]
name = "huge"
root_seed = 1
replicates = 2

[[families]]
name = "lp-planted"
sizes = [{rows = 1000000, cols = 2000000}]
instances = 1

[sweep]
projectors = ["gaussian"]
k = [100]
"""
