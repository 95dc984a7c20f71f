"""`calib probe`: one instance at one k, through calib.cli.main."""

import json
from pathlib import Path

import pytest
from scipy import stats

from calib.cli import main
from calib.families import get
from calib.metrics import FIELDS
from calib.trial import InstanceRef, ProjectorChoice, Trial, run_trial

NETLIB = Path(__file__).resolve().parents[1] / "calib" / "data" / "netlib"
TIMES = {name for name, field in FIELDS.items() if field.units == "s"}


def test_family_probe_prints_replicates_and_summary_and_matches_a_campaign_trial(tmp_path, capsys):
    out = tmp_path / "probe.json"
    argv = ["probe", "lp-planted", "--param", "rows=20", "--param", "cols=40", "--param", "cost=nonnegative",
            "--k", "18", "--replicates", "3", "--seed", "7", "--preset", "bound", "--json", str(out)]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "replicate 2:" in text and "summary (median / max over replicates):" in text
    for name in ("completion", "basis-lstsq", "alternating", "restricted-repair", "warm-start"):
        assert f"  {name}: success " in text
    payload = json.loads(out.read_text())
    assert payload["k"] == 18 and payload["kind"] == "lp" and len(payload["records"]) == 3 * 5
    # The probe's streams are a campaign's with root_seed = --seed (instance 0): same numbers.
    params = get("lp-planted").resolve({"rows": 20, "cols": 40, "cost": "nonnegative"}, "test")
    ref = InstanceRef("lp-planted", params, 0, 7)
    problem = ref.build().problem
    from calib.reduce import HANDLERS

    original = HANDLERS["lp"].solve_original(problem, {"time_limit_s": 60.0})
    rows = run_trial(Trial(ref, ProjectorChoice("gaussian"), 18, 1), problem, "lp", original, ["warm-start"], {"time_limit_s": 60.0})
    probed = next(r for r in payload["records"] if r["replicate"] == 1 and r["retrieval"] == "warm-start")
    for name in set(FIELDS) - TIMES:
        assert probed[name] == rows[0][name], name
    summary = payload["summary"]["retrievals"]["warm-start"]
    # the 'bound' predicate (docs/spec.md): the feasibility verdict matches and the projected bound's gap
    # (orig - proj) / obj_scale is at most 0.05, recomputed here from the printed objectives; obj_scale is
    # |orig| here, since c > 0 and x* >= 0 make the objective size |c|^T |x*| equal to orig itself
    gap = payload["predicate"]["gap"]
    assert gap == 0.05
    warm = [r for r in payload["records"] if r["retrieval"] == "warm-start"]
    assert all(r["obj_scale"] == abs(r["orig_objective"]) for r in warm)
    expected = sum(r["feasibility_agrees"] and (r["orig_objective"] - r["proj_objective"]) / abs(r["orig_objective"]) <= gap
                   for r in warm)
    assert summary["trials"] == 3 and summary["successes"] == expected
    assert 0 < expected < 3  # k = 18 of m = 20 at seed 7 gives a mix, so the count is really tested
    # one-sided Clopper-Pearson lower bound; reference: scipy.stats.binomtest(..., alternative="greater")
    reference = stats.binomtest(expected, 3, alternative="greater").proportion_ci(0.95, method="exact").low
    assert summary["success_lower_bound"] == pytest.approx(reference, rel=1e-9)


def test_mps_probe_with_eps_and_one_retrieval(capsys):
    # afiro: 27 standard-form rows, 51 columns, so 52 points; the ln(n)/eps^2 rule of thumb (common
    # practice) gives k = ceil(ln 52 / 0.99^2) = ceil(4.03) = 5.
    path = NETLIB / "feasible" / "afiro.mps"
    assert main(["probe", str(path), "--eps", "0.99", "--rule", "ln-over-eps2", "--retrieval", "basis-lstsq",
                 "--replicates", "2"]) == 0
    text = capsys.readouterr().out
    assert "k = 5 (eps = 0.99 by ln-over-eps2 with 52 points)" in text
    assert "warm-start" not in text
    # the header says how n and m are counted, with their values: 27 rows, 51 + 1 points
    flat = " ".join(text.split())  # the header wraps where the file's path makes it long
    assert "(lp; projected dimension m = 27, n = 52 points)" in flat and "\n  n and m: n = the columns" in text
    # the objective is printed with its digits: Netlib's published optimum of afiro is -4.6475314286E+02
    # (the Netlib lp/data index; from memory); 10 significant digits must agree
    printed = float(text.split("original: optimal, objective ")[1].split(",")[0])
    assert printed == pytest.approx(-464.75314286, abs=5e-9 * 464.75)
    assert len(text.split("original: optimal, objective ")[1].split(",")[0].lstrip("-").replace(".", "")) >= 10


def test_points_probe_reports_distortion(capsys):
    assert main(["probe", "points-gaussian", "--param", "points=15", "--param", "dim=40", "--k", "20",
                 "--replicates", "2", "--max-distortion", "5"]) == 0
    text = capsys.readouterr().out
    assert "distortion_max" in text and "pairs_checked          105 / 105" in text


@pytest.mark.parametrize("argv,where", [
    (["probe", "no-such-family"], "INSTANCE_OR_FAMILY"),
    (["probe", "lp-planted", "--param", "rows=10"], "--param"),
    (["probe", "lp-planted", "--param", "rows"], "--param"),
    (["probe", "lp-planted", "--param", "rows=10", "--param", "cols=20", "--k", "11"], "--k"),
    (["probe", "lp-planted", "--param", "rows=10", "--param", "cols=20", "--retrieval", "lift"], "--retrieval"),
    (["probe", "lp-planted", "--param", "rows=10", "--param", "cols=20", "--replicates", "0"], "--replicates"),
    (["probe", "lp-planted", "--param", "rows=10", "--param", "cols=20", "--eps", "0.1"], "--eps"),
    (["probe", "lp-planted", "--param", "rows=10", "--param", "cols=20", "--projector", "nope"], "--projector"),
    (["probe", str(NETLIB / "feasible" / "afiro.mps"), "--param", "rows=3"], "--param"),
    (["probe", "missing.mps"], "missing.mps"),
    (["probe", "qp-random", "--param", "vars=5", "--param", "rows=2", "--time-limit", "0"], "--time-limit"),
])
def test_bad_input_exits_2_with_one_line(argv, where, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and where in err[0] and "Traceback" not in err[0]


def test_saved_instance_probe_uses_the_instance_identity(tmp_path, capsys):
    # A saved instance is probed with the streams of its own (family, params, index): the same
    # projected optimum as probing the family itself at that index would give (index 0 here).
    from calib.instance_io import save_instance

    params = get("lp-planted").resolve({"rows": 15, "cols": 30, "cost": "nonnegative"}, "test")
    ref = InstanceRef("lp-planted", params, 0, 3)
    manifest = save_instance(ref.build(), [ref.key, 3], tmp_path)
    saved, direct = tmp_path / "saved.json", tmp_path / "direct.json"
    common = ["--k", "8", "--replicates", "2", "--seed", "3", "--retrieval", "basis-lstsq"]
    assert main(["probe", str(manifest), "--json", str(saved)] + common) == 0
    assert main(["probe", "lp-planted", "--param", "rows=15", "--param", "cols=30", "--param", "cost=nonnegative",
                 "--json", str(direct)] + common) == 0
    capsys.readouterr()
    first, second = (json.loads(path.read_text())["records"] for path in (saved, direct))
    # the MPS round trip keeps every double (calib.instance_io), so the projected optimum is the same
    assert [r["proj_objective"] for r in first] == pytest.approx([r["proj_objective"] for r in second], rel=1e-12)


def test_probe_k_list_gives_one_block_per_k(tmp_path, capsys):
    out = tmp_path / "probe.json"
    argv = ["probe", "lp-planted", "--param", "rows=20", "--param", "cols=40", "--k", "4,12", "--replicates", "2",
            "--retrieval", "basis-lstsq", "--json", str(out)]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "k = 4 (given)" in text and "k = 12 (given)" in text
    assert [run["k"] for run in json.loads(out.read_text())["runs"]] == [4, 12]


def test_probe_find_k_traces_the_search_and_matches_the_exact_threshold(capsys):
    # rank-3 planted rows: k >= 3 keeps the LP exactly, smaller k cannot (the same fact test_lp_core checks)
    argv = ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--param", "rank=3",
            "--param", "cost=nonnegative", "--find-k", "--max-gap", "1e-6", "--delta", "0.3", "--confidence", "0.9"]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "safe k = 3:" in text and "bisection assumes" in text and "not a proof" in text
    assert "k in [1, 12]" in text


@pytest.mark.parametrize("extra, where", [
    (["--find-k", "--low", "8", "--high", "4"], "--low/--high"),
    (["--find-k", "--high", "50"], "--low/--high"),
    (["--low", "2"], "--low/--high"),
    (["--find-k", "--max-trials", "0"], "--max-trials"),
    (["--k", "4,40"], "--k"),
])
def test_probe_search_options_are_checked(extra, where, capsys):
    assert main(["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24"] + extra) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and where in err[0]
