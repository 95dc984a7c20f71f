"""What a new user reads first: the one-screen answer, and outputs that agree with each other.

- the k search whose cap cannot pass: the trials a pass needs are checked against the closed form of
  the one-sided Clopper-Pearson bound at n successes in n trials, alpha^(1/n) (Clopper & Pearson
  1934; scipy.stats.beta as the reference), and the table of such a store agrees with the search;
- the one-screen answer of `calib tables` (numeric size order, lines of at most 120 characters,
  "don't sketch" where k = m): presentation rules of this project (common practice for terminal
  text: 120 columns), checked on a real campaign;
- `probe --k 10 20`, one-line CLI errors naming the command's help page;
- `compare` and `tables` on point sets decide something by default (the distortion predicate);
- the report's figures: nothing empty is drawn (a sentence instead).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import pytest
from scipy import stats

from analysis_campaign import run_campaign_in, run_spec
from engine_helpers import write_search_spec
from calib.analysis.records import Analysis
from calib.analysis.summary import NO_K, NO_REDUCTION, SKETCH, natural_key, summary_lines
from calib.cli import main
from calib.sweep.runner import run_campaign
from calib.sweep.search import KSearch, all_pass_trials, cap_need
from calib.sweep.spec import load_spec

WIDTH = 120  # common practice: a terminal of 120 columns


# ----- a k search whose cap cannot pass ------------------------------------------------------

def _fewest_all_success_trials(rate: float, alpha: float) -> int:
    """Fewest n whose n-of-n one-sided Clopper-Pearson lower bound at 1 - alpha reaches ``rate``
    (scipy.stats.beta: the lower bound of s = n successes is the alpha quantile of Beta(n, 1))."""
    n = 1
    while stats.beta.ppf(alpha, n, 1) < rate:
        n += 1
    return n


@pytest.mark.parametrize("low, high, rate, confidence", [(4, 40, 0.9, 0.95), (4, 300, 0.9, 0.95), (1, 12, 0.7, 0.9)])
def test_the_cap_a_search_needs_is_the_clopper_pearson_n_of_n(low, high, rate, confidence):
    need = cap_need(low, high, rate, confidence)
    search = KSearch(low, high, rate, confidence, cap=1)
    assert need.bisection <= _fewest_all_success_trials(rate, search.alpha / 2)  # the sequence may pass sooner
    assert need.walk <= _fewest_all_success_trials(rate, search.walk_alpha)
    assert need.bisection_level == pytest.approx(1 - search.alpha / 2)
    # the closed form alpha^(1/n) >= rate of the same bound
    assert _fewest_all_success_trials(rate, 0.05) == math.ceil(math.log(0.05) / math.log(rate)) == all_pass_trials(rate, 0.05)


def test_a_cap_of_30_cannot_pass_at_0_9994():
    # 1 instance x 30 replicates searched on [4, 40]: 8 bisection looks at 1 - 0.01 / 8 / 2 = 0.999375
    need = cap_need(4, 40, 0.9, 0.95)
    assert round(need.bisection_level, 4) == 0.9994 and need.bisection == 71
    search = KSearch(4, 40, 0.9, 0.95, cap=30)
    while (demand := search.demand()) is not None:
        search.offer([True] * demand[1])
    assert search.safe_k is None and search.steps[0].successes == search.steps[0].trials == 30
    assert "the cap of 30 trials per k is too small" in search.reason and "71 successes in a row" in search.reason
    assert "widen the range" not in search.reason


def test_dry_run_gives_the_replicates_the_search_needs(tmp_path, capsys):
    spec = write_search_spec(tmp_path, replicates=5)  # 2 instances x 5 = a cap of 10 per k
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--dry-run", "--no-probe"]) == 0
    text = capsys.readouterr().out
    need = cap_need(1, 12, 0.7, 0.9)
    assert "the k search cannot pass any k" in text
    assert f"use replicates = {math.ceil(need.trials / 2)}" in text and "trials per k is too small" in text
    assert main(["run", str(write_search_spec(tmp_path, name="big", replicates=15)), "--out", str(tmp_path / "b"),
                 "--dry-run", "--no-probe"]) == 0
    assert "the k search can pass a k (cap 30 trials per k" in capsys.readouterr().out


def test_a_store_gives_one_answer_the_table_states_the_search_claim(tmp_path, capsys):
    # a cap of 10: every trial at the high end succeeds (rank-3 rows, k = 12 keeps the LP), and 10 of
    # 10 pass the table's 90% look (0.1^(1/10) = 0.79 >= 0.7) but not the search's bisection look
    spec = write_search_spec(tmp_path, replicates=5)
    summary = run_campaign(load_spec(spec), tmp_path / "out", inline=True)
    (cell,) = summary.searches
    assert cell.search.safe_k is None and "too small" in cell.search.reason
    table_path = tmp_path / "t.json"
    capsys.readouterr()
    assert main(["tables", str(summary.store_path), "--json", str(table_path)]) == 0  # its [target] by default
    text = capsys.readouterr().out
    (analysis,) = json.loads(table_path.read_text())["analyses"]
    assert analysis["tau"] == 1e-6 and analysis["predicate"]["name"] == "bound"
    (entry,) = analysis["entries"]
    assert entry["grid"][-1]["passes"]  # the grid rule alone would have claimed k = 12
    assert entry["safe_k"] is None and entry["class"]["safe_k"] is None
    assert "too small" in entry["safe_k_reason"] and "k search" in entry["safe_k_scope"]
    assert "safe k = 12" not in text and "no safe k in [1, 12]: the cap of 10 trials per k is too small" in text


# ----- the one-screen answer -----------------------------------------------------------------

@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    return run_campaign_in(tmp_path_factory.mktemp("campaign"))


def test_tables_opens_with_the_answer_in_numeric_order_within_120_columns(campaign, tmp_path, capsys):
    timings = tmp_path / "timings.csv"
    assert main(["tables", str(campaign), "--preset", "bound", "--tau", "0.05", "--timings", str(timings)]) == 0
    text = capsys.readouterr().out
    lines = text.splitlines()
    assert max(len(line) for line in lines) <= WIDTH, max(lines, key=len)
    head = lines[:lines.index("") + 12]
    assert head[2].startswith("The answer at tau = 0.05")
    sizes = [line.split()[1] for line in head if line.startswith("  lp-planted")]
    assert sizes == ["rows=30,cols=60", "rows=60,cols=120", "rows=120,cols=240"]  # not the string order
    blocks = [line.split()[1] for line in lines if line.startswith("lp-planted rows=")]
    assert blocks == sizes
    assert "k = 0 + 0 ± 0 ln n" not in text and "rank=null" not in text


#: the first analysis of the golden quickstart table (tests/golden): the template of the entries below
GOLDEN = Path(__file__).parent / "golden" / "quickstart" / "safe_k.json"


def _golden_analysis() -> Analysis:
    return Analysis.from_dict(json.loads(GOLDEN.read_text(encoding="utf-8"))["analyses"][0])


def _entry(size, m, k, kind="lp", instances=29, reason=""):
    """A table entry (a record of the golden table) with the fields the answer reads set."""
    template = _golden_analysis().entries[0]
    return replace(template, family="f", class_params={}, size=size, params={"size": size}, projector="gaussian",
                   retrieval="r", kind=kind, projected_dim=m, instances=instances, safe_k=k,
                   class_=replace(template.class_, safe_k=k, reason=reason, instances_needed=29))


def test_the_answer_says_dont_sketch_where_k_is_m_or_no_k_passes():
    import pandas as pd

    entries = [_entry("rows=150", 150, None, reason="no swept k reaches the target, already for the instances measured"),
               _entry("rows=90", 90, 90), _entry("rows=600", 600, 60), _entry("rows=30", 30, 10, kind="points")]
    timings = pd.DataFrame([{"family": "f", "params": json.dumps({"size": "rows=600"}, separators=(",", ":")),
                             "projector": "gaussian", "retrieval": "r", "k": 60, "speedup": 13.2,
                             "baseline_median_s": 1.5, "reduced_median_s": 0.11}])
    lines = summary_lines(replace(_golden_analysis(), entries=entries), timings, lambda entry: "")
    assert [line["size"] for line in lines] == ["rows=30", "rows=90", "rows=150", "rows=600"]
    verdicts = {line["size"]: line["verdict"] for line in lines}
    assert verdicts == {"rows=30": SKETCH, "rows=90": NO_REDUCTION, "rows=150": NO_K, "rows=600": SKETCH}
    assert lines[-1]["speedup"] == 13.2 and lines[-1]["fraction"] == 0.1
    assert sorted(["b10", "b9", "a100"], key=natural_key) == ["a100", "b9", "b10"]


def test_a_report_made_with_the_table_is_the_same_table(campaign, tmp_path):
    # one analysis for both: the table written beside the report equals the table written alone
    alone, both = tmp_path / "alone.json", tmp_path / "both.json"
    assert main(["tables", str(campaign), "--tau", "0.05", "0.1", "--json", str(alone)]) == 0
    assert main(["tables", str(campaign), "--tau", "0.05", "0.1", "--json", str(both), "--html", str(tmp_path / "r.html")]) == 0
    assert alone.read_bytes() == both.read_bytes()
    assert "<h2>The answer</h2>" in (tmp_path / "r.html").read_text()


# ----- probe and the command line ------------------------------------------------------------

def test_probe_takes_several_k_like_tau_and_leads_with_the_verdict(capsys):
    argv = ["probe", "lp-planted", "--param", "rows=12", "--param", "cols=24", "--replicates", "2",
            "--retrieval", "basis-lstsq", "--k", "4", "8"]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert text.count("probe: lp-planted") == 2 and "k = 4 (given)" in text and "k = 8 (given)" in text
    first = text[:text.index("probe: lp-planted", 1)]
    assert first.index("verdict at k = 4:") < first.index("summary (median") < first.index("replicate 0:")
    assert " s  t_solve_proj " in first and "t_sketch [s]" not in first  # a unit beside each time
    assert max(len(line) for line in text.splitlines()) <= WIDTH


def test_an_unknown_argument_is_one_line_naming_the_command_help(capsys):
    for argv, line in ((["probe", "lp-planted", "--k", "4", "--bogus"],
                        "calib: error: probe: unrecognized arguments: --bogus (see `calib probe --help`)"),
                       (["--bogus"], "calib: error: unrecognized arguments: --bogus (see `calib --help`)")):
        with pytest.raises(SystemExit) as stop:  # argparse's usage error: exit code 2
            main(argv)
        assert stop.value.code == 2 and capsys.readouterr().err.strip() == line


# ----- point sets get a predicate that decides something -------------------------------------

POINTS = """
[campaign]
name = "points-check"
root_seed = 3
replicates = 2

[[families]]
name = "points-gaussian"
sizes = [{points = 20, dim = 60}]
instances = 4

[sweep]
projectors = ["gaussian", "countsketch"]
k = [10, 30, 60]
"""


@pytest.fixture(scope="module")
def points(tmp_path_factory):
    return run_spec(POINTS, tmp_path_factory.mktemp("points"))


def test_compare_and_tables_on_point_sets_decide_by_distortion(points, tmp_path, capsys):
    assert main(["compare", str(points)]) == 0
    assert "countsketch vs gaussian" in capsys.readouterr().out
    table = tmp_path / "t.json"
    assert main(["tables", str(points), "--json", str(table)]) == 0
    (analysis,) = json.loads(table.read_text())["analyses"]
    assert analysis["predicate"]["name"] == "distortion" and not analysis["excluded"] and len(analysis["entries"]) == 2


def test_the_report_of_point_sets_draws_no_empty_figure(points, tmp_path):
    html = tmp_path / "r.html"
    assert main(["tables", str(points), "--html", str(html)]) == 0
    text = html.read_text()
    assert 'id="fig-speedup-points-gaussian"' not in text and "a point set has no solve to save" in text
    assert 'id="fig-law-points-gaussian"' in text and "no solve" in text


# ----- lookup: the answer first ---------------------------------------------------------------

def _atlas():
    from calib import atlas

    return atlas.SHIPPED / "safe_k.json"


@pytest.mark.skipif(not _atlas().is_file(), reason="no atlas committed under results/atlas/")
def test_lookup_answers_on_its_first_line_and_names_the_best_projector(capsys):
    from calib import atlas

    size = {"measurements": 2000, "length": 8000}
    named = {name: atlas.safe_k("lp-basis-pursuit", size, name) for name in ("gaussian", "srht", "achlioptas", "countsketch")}
    best = atlas.safe_k("lp-basis-pursuit", size)  # no projector: the table's best
    assert best["safe_k"] == min(answer["safe_k"] for answer in named.values())
    assert best["other_projectors"] == {name: answer["safe_k"] for name, answer in named.items() if name != best["projector"]}
    assert main(["lookup", "--family", "lp-basis-pursuit", "--size", "measurements=2000,length=8000"]) == 0
    first = capsys.readouterr().out.splitlines()[0]
    assert first == best["answer"] and first.startswith(f"safe k = {best['safe_k']} (k/m = ")
    assert "faster end to end" in first  # the speed-up from timings.csv beside the table
    assert main(["lookup", "--family", "lp-basis-pursuit", "--size", "measurements=2000,length=8000", "--k-only"]) == 0
    assert capsys.readouterr().out.strip() == str(best["safe_k"])


@pytest.mark.skipif(not _atlas().is_file(), reason="no atlas committed under results/atlas/")
def test_a_none_answer_has_a_flag_saying_why(capsys):
    from calib import atlas

    answer = atlas.safe_k("lp-quantile", {"rows": 2000, "features": 5}, "countsketch")
    assert answer["safe_k"] is None and answer["flag"].startswith("no reduction meets the target")
    assert answer["answer"] == "don't sketch with countsketch: no reduction meets the target"
    assert main(["lookup", "--family", "lp-quantile", "--size", "rows=2000,features=5", "--k-only"]) == 0
    assert capsys.readouterr().out.strip() == "none"


def test_a_report_drawn_from_a_table_file_shows_that_table(points, tmp_path, capsys):
    table, timings, spec = tmp_path / "safe_k.json", tmp_path / "timings.csv", tmp_path / "spec.toml"
    assert main(["tables", str(points), "--json", str(table), "--timings", str(timings)]) == 0
    spec.write_text(POINTS, encoding="utf-8")
    html = tmp_path / "r.html"
    assert main(["report", str(table), "--spec", str(spec), "--html", str(html)]) == 0  # timings.csv found beside it
    text = html.read_text()
    for entry in json.loads(table.read_text())["analyses"][0]["entries"]:
        assert f"<td>{entry['projector']}</td>" in text
    assert "&quot;root_seed&quot;: 3" in text  # the spec, once its fingerprint matched
    capsys.readouterr()
    spec.write_text(POINTS.replace("root_seed = 3", "root_seed = 4"), encoding="utf-8")
    assert main(["report", str(table), "--spec", str(spec), "--html", str(html)]) == 2
    assert "fingerprint differs" in capsys.readouterr().err
    assert main(["report", str(table), "--tau", "0.1", "--html", str(html)]) == 2
    assert "carries its own analysis" in capsys.readouterr().err
