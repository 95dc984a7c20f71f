"""The k search: spec forms, the sequential test's stated confidence, and the search on the engine.

Statistical checks simulate Bernoulli trials with fixed seeds; their tolerances are binomial
quantiles (scipy.stats.binom) at a one-in-a-thousand level, never tuned to the observed counts.
The confidence-sequence guarantee itself is Ville's inequality for the beta-binomial mixture
martingale (Howard, Ramdas, McAuliffe & Sekhon 2021, Ann. Statist. 49(2), section 3); the
inflation of repeated fixed-n Clopper–Pearson looks is the classic optional-stopping effect
(Armitage, McPherson & Rowe 1969, J. R. Stat. Soc. A 132(2)), used here to show the check can fail.
"""

from __future__ import annotations

import json
import sqlite3
import textwrap

import numpy as np
import pytest
from scipy import stats
from scipy.special import betaln

from engine_helpers import search_verdicts as _verdicts
from engine_helpers import trial_ids as _trial_ids
from engine_helpers import write_search_spec as _spec

from calib.cli import main
from calib.errors import InputError
from calib.spec_problems import SpecError
from calib.store.database import Store
from calib.sweep.runner import replay_searches, run_campaign
from calib.sweep.search import PRIOR_STRENGTH, KSearch, confidence_sequence, decide, drive, max_looks, replay
from calib.sweep.spec import load_spec, parse_spec

BASE = {"campaign": {"name": "s", "root_seed": 3, "replicates": 5},
        "families": [{"name": "lp-planted", "sizes": [{"rows": 12, "cols": 24}]}],
        "sweep": {"projectors": ["gaussian"], "k": {"search": {"low": 1, "high": 12}}},
        "target": {"preset": "bound", "tolerance": 1e-6}}


def _raw(**changes) -> dict:
    raw = {key: dict(value) if isinstance(value, dict) else list(value) for key, value in BASE.items()}
    for path, value in changes.items():
        table, key = path.split("__")
        if value is None:
            raw[table].pop(key, None)
        else:
            raw[table][key] = value
    return raw


# ----- spec ---------------------------------------------------------------------------------

def test_search_forms_parse():
    spec = parse_spec(_raw())
    assert spec.k_grid.is_search and spec.k_grid.values == (1, 12)
    assert spec.target.rate == pytest.approx(0.9) and spec.target.predicate.gap == 1e-6
    spec = parse_spec(_raw(sweep__k={"search": {"low_fraction": 0.1, "high_fraction": 0.5}}))
    assert spec.k_grid.mode == "search-fractions" and spec.k_grid.step == 1
    spec = parse_spec(_raw(sweep__k={"search": {"low": 2, "high": 12, "step": 2}}))
    assert spec.k_grid.values == (2, 12) and spec.k_grid.step == 2


@pytest.mark.parametrize("changes, path", [
    ({"sweep__k": {"search": {"low": 5, "high": 5}}}, "sweep.k.search"),
    ({"sweep__k": {"search": {"low": 0, "high": 5}}}, "sweep.k.search.low"),
    ({"sweep__k": {"search": {"low": 2.5, "high": 5}}}, "sweep.k.search.low"),
    ({"sweep__k": {"search": {"low_fraction": 0.5, "high_fraction": 1.5}}}, "sweep.k.search.high_fraction"),
    ({"sweep__k": {"search": {"low": 1}}}, "sweep.k.search"),
    ({"sweep__k": {"search": {"low": 1, "high": 9, "step": 0}}}, "sweep.k.search.step"),
    ({"sweep__k": {"search": {"low": 1, "high": 9, "step": 1.5}}}, "sweep.k.search.step"),
    ({"sweep__k": {"search": {"low": 20, "high": 30}}}, "families[0].sizes[0]"),  # above m = 12
    ({"target__delta": 1.5}, "target.delta"),
    ({"target__confidence": 0}, "target.confidence"),
    ({"target__preset": "nope"}, "target.preset"),
    ({"target__tolerance": -1}, "target.tolerance"),
    ({"target__extra": 1}, "target.extra"),
    ({"target__preset": "distortion", "target__tolerance": None}, "target.preset"),  # decides nothing on an LP
])
def test_bad_search_specs_name_the_field(changes, path):
    with pytest.raises(SpecError) as error:
        parse_spec(_raw(**changes))
    assert path in str(error.value)


def test_search_needs_target_and_target_needs_search():
    raw = _raw()
    del raw["target"]
    with pytest.raises(SpecError, match="target: missing table"):
        parse_spec(raw)
    with pytest.raises(SpecError, match="only a k search reads"):
        parse_spec(_raw(sweep__k=[2, 4]))


def test_bad_search_spec_exits_2_with_one_line(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    spec.write_text(textwrap.dedent("""
        [campaign]
        name = "bad"
        root_seed = 1
        [[families]]
        name = "lp-planted"
        sizes = [{rows = 12, cols = 24}]
        [sweep]
        projectors = ["gaussian"]
        k = {search = {low = 8, high = 4}}
    """))
    assert main(["run", str(spec), "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "sweep.k.search" in err[0] and "target" in err[0] and "Traceback" not in err[0]


# ----- the sequential test ------------------------------------------------------------------

def _log_mixture(successes, trials, p, rate):
    a, b = PRIOR_STRENGTH * rate, PRIOR_STRENGTH * (1 - rate)
    return betaln(a + successes, b + trials - successes) - betaln(a, b) - successes * np.log(p) - (trials - successes) * np.log1p(-p)


def test_mixture_matches_a_direct_integral():
    # M_n(p) is the Beta(a, b) average of q^s (1 - q)^(n - s) over p^s (1 - p)^(n - s)  (its definition)
    from scipy.integrate import quad

    a, b = PRIOR_STRENGTH * 0.9, PRIOR_STRENGTH * 0.1
    integral, _ = quad(lambda q: q ** 18 * (1 - q) ** 2 * stats.beta.pdf(q, a, b), 0, 1)
    assert np.exp(_log_mixture(18, 20, 0.8, 0.9)) == pytest.approx(integral / (0.8 ** 18 * 0.2 ** 2), rel=1e-8)


def _false_passes(p: float, rate: float, alpha: float, cap: int, runs: int, seed: int, rule: str) -> int:
    """Runs (of ``runs``) whose repeated looks ever declared p >= rate, with p below or at ``rate``."""
    rng = np.random.default_rng([seed, 13])
    outcomes = rng.random((runs, cap)) < p
    successes = np.cumsum(outcomes, axis=1)
    trials = np.arange(1, cap + 1)
    if rule == "sequence":
        passing = (_log_mixture(successes, trials, rate, rate) >= np.log(1 / alpha)) & (successes > rate * trials)
    else:  # a fixed-n one-sided Clopper–Pearson lower bound at every look
        lower = stats.beta.ppf(alpha, successes, trials - successes + 1)
        passing = np.nan_to_num(lower) >= rate
    return int(passing.any(axis=1).sum())


def test_anytime_false_pass_rate_holds_at_the_boundary_where_repeated_cp_looks_do_not():
    runs, alpha, rate, cap = 2000, 0.05, 0.9, 400
    limit = stats.binom.ppf(0.999, runs, alpha)  # the count allowed if the true rate is alpha
    sequence = _false_passes(rate, rate, alpha, cap, runs, seed=1, rule="sequence")
    assert sequence <= limit
    repeated = _false_passes(rate, rate, alpha, cap, runs, seed=1, rule="clopper-pearson")
    assert repeated > limit  # the same data looked at 400 times with fixed-n bounds breaks the level


def _simulate(curve: dict, low: int, high: int, rate: float, confidence: float, cap: int, rng,
              all_at_once: bool = False) -> KSearch:
    """A search fed Bernoulli(curve[k]) outcomes: what it demands, or (same decisions) the whole cap at once."""
    search = KSearch(low, high, rate, confidence, cap)
    drawn: dict[int, list] = {}
    while (demand := search.demand()) is not None:
        k, count = demand
        count = cap if all_at_once else count
        have = drawn.setdefault(k, [])
        have += list(rng.random(count - len(have)) < curve[k]) if count > len(have) else []
        search.offer(have[:count])
    return search


def _many_searches(curve: dict, low: int, high: int, cap: int, seed: int, runs: int = 300,
                   rate: float = 0.9, confidence: float = 0.8) -> tuple[list, int]:
    """(searches, wrong claims) of ``runs`` searches on ``curve``, and the check that the wrong
    claims stay within the binomial 0.999 quantile of runs x (1 - confidence) (module text)."""
    rng = np.random.default_rng([20261202, seed])
    searches = [_simulate(curve, low, high, rate, confidence, cap, rng, all_at_once=True) for _ in range(runs)]
    wrong = sum(s.safe_k is not None and curve[s.safe_k] < rate for s in searches)
    assert wrong <= stats.binom.ppf(0.999, runs, 1 - confidence)
    return searches, wrong


def test_the_stated_confidence_holds_over_many_searches():
    # an adversarial curve: just below the target up to k = 11, then safe (p = 0.97)
    low, high = 1, 40
    curve = {k: (0.88 if k < 12 else 0.97) for k in range(low, high + 1)}
    searches, _ = _many_searches(curve, low, high, cap=300, seed=1)
    found = sum(s.safe_k == 12 for s in searches)
    assert found >= len(searches) // 2  # the search has power: p = 0.97 passes, p = 0.88 mostly fails within 300 trials
    assert all(sum(step.phase == "bisection" for step in s.steps) <= max_looks(low, high) for s in searches)


def test_the_stated_confidence_holds_where_the_walk_down_is_tempted():
    # a long plateau just below the target (p = 0.895 for k < 25): every bisection look and every
    # walk step there is a chance of a false pass; the claim must still hold at its confidence
    curve = {k: (0.895 if k < 25 else 0.99) for k in range(1, 61)}
    _many_searches(curve, 1, 60, cap=200, seed=4)


def _fixed(successes_at: dict, cap: int, low: int, high: int, step: int = 1) -> KSearch:
    """A search fed fixed outcome lists: successes first would let the anytime test pass early, so the
    failures lead (the hardest order for a pass)."""
    search = KSearch(low, high, 0.9, 0.95, cap, step)
    while (demand := search.demand()) is not None:
        k, _ = demand
        wins = successes_at(k)
        search.offer([False] * (cap - wins) + [True] * wins)
    return search


def test_the_walk_down_claims_what_a_grid_at_the_walk_level_claims():
    # 78 of 80 passes the walk's Clopper-Pearson look at 0.96 (lower bound 0.920; scipy.stats.beta
    # quantile, checked in test_stats) but not a bisection look at 1 - 0.01/16 (0.86): the bisection
    # alone stops at 30, the walk goes down to 20, where 60 of 80 stops it
    search = _fixed(lambda k: 80 if k >= 30 else 78 if k >= 20 else 60, 80, 1, 40)
    bisection = [step for step in search.steps if step.phase == "bisection"]
    walk = [step for step in search.steps if step.phase == "walk"]
    assert min(step.k for step in bisection if step.verdict == "pass") == 30
    assert search.safe_k == 20 and [step.k for step in walk] == list(range(29, 18, -1))
    assert walk[-1].verdict.startswith("fail") and all(step.verdict == "pass" for step in walk[:-1])


def test_the_walk_stays_on_the_lattice_and_reads_no_trial_twice():
    search = _fixed(lambda k: 80 if k >= 31 else 78 if k >= 21 else 0, 80, 5, 45, step=4)
    assert all((step.k - 5) % 4 == 0 for step in search.steps if step.k != 45)
    assert search.safe_k == 21
    # k = 29 and 25 failed in the bisection (78 of 80 cannot reach its stricter level, 80 of 80: known
    # at the first failure, the failures lead); the walk reads their 80 trials, passes them at its own
    # level, and they count once
    both = {step.k for step in search.steps if step.phase == "walk"} & {step.k for step in search.steps if step.phase == "bisection"}
    assert both == {25, 29}
    assert [step.trials for step in search.steps if step.phase == "bisection" and step.k in both] == [1, 1]
    assert search.trials_read == 80 + 1 + 80 + 80 + 80 + 80 + 4  # k = 45, 5, 25, 33, 29, 21, 17


def test_a_sharp_curve_gives_the_exact_k_with_few_trials():
    curve = {k: (0.0 if k < 23 else 1.0) for k in range(1, 101)}
    search = _simulate(curve, 1, 100, 0.9, 0.95, 1000, np.random.default_rng([5, 2]))
    whole = _simulate(curve, 1, 100, 0.9, 0.95, 1000, np.random.default_rng([5, 2]), all_at_once=True)
    assert [(s.k, s.trials, s.verdict) for s in search.steps] == [(s.k, s.trials, s.verdict) for s in whole.steps]
    assert search.safe_k == 23
    assert search.trials_read < 600  # 9 k values; a failing k stops after a handful of trials
    assert {step.verdict for step in search.steps if step.k < 23} == {"fail"}


def test_high_end_failing_gives_no_claim():
    search = _simulate({k: 0.5 for k in range(1, 9)}, 1, 8, 0.9, 0.95, 200, np.random.default_rng([5, 3]))
    assert search.safe_k is None and "high end" in search.reason and len(search.steps) == 1


def _steps(search: KSearch) -> list:
    return [(s.k, s.trials, s.successes, s.lower, s.upper, s.verdict, s.phase) for s in search.steps]


def test_replay_of_the_recorded_outcomes_gives_the_live_verdict():
    # the live search runs its trials as it asks for them (Bernoulli draws on a step curve); a fresh
    # search replayed from every outcome it read reaches the same steps, bounds and verdict, and a
    # record cut short at the last k it tested stops there, not finished (a search is a pure
    # function of its outcomes in trial order: the module text)
    curve = {k: (0.6 if k < 17 else 0.99) for k in range(1, 41)}
    rng = np.random.default_rng([20261202, 9])
    ran: dict[int, list] = {}

    def run_trials(k: int, count: int) -> list:
        have = ran.setdefault(k, [])
        have += list(rng.random(count - len(have)) < curve[k]) if count > len(have) else []
        return have[:count]

    live = KSearch(1, 40, 0.9, 0.95, 200)
    assert drive(live, run_trials) and live.done
    replayed = replay(KSearch(1, 40, 0.9, 0.95, 200), ran)
    assert replayed.done and (replayed.safe_k, replayed.reason) == (live.safe_k, live.reason)
    assert _steps(replayed) == _steps(live) and live.safe_k == 17
    last = live.steps[-1].k
    first = next(index for index, step in enumerate(live.steps) if step.k == last)  # the walk may test a k again
    cut = replay(KSearch(1, 40, 0.9, 0.95, 200), {**ran, last: ran[last][:live.steps[first].trials - 1]})
    assert not cut.done and cut.safe_k is None and _steps(cut) == _steps(live)[:first]


def test_decisions_and_bounds_agree():
    alpha = 0.05 / 7
    for successes, trials in [(64, 64), (0, 6), (50, 60), (59, 60)]:
        verdict = decide(successes, trials, 0.9, alpha)
        low, high = confidence_sequence(successes, trials, 0.9, alpha)
        assert (verdict == "pass") == (low > 0.9 - 1e-9) and (verdict == "fail") == (high < 0.9 + 1e-9)


# ----- on the engine ------------------------------------------------------------------------

def test_search_runs_then_a_grid_reuses_every_search_trial(tmp_path, capsys):
    spec = _spec(tmp_path)
    first = run_campaign(load_spec(spec), tmp_path / "out", inline=True)
    (cell,) = first.searches
    assert cell.search.safe_k == 3  # rank-3 rows: k >= 3 keeps the LP exactly, smaller k cannot (see test_lp_core)
    assert first.ran == first.planned == len(_trial_ids(first.store_path)) and first.skipped == 0
    searched = _trial_ids(first.store_path)
    again = run_campaign(load_spec(spec), tmp_path / "out", inline=True)
    assert again.ran == 0 and _verdicts(again) == _verdicts(first)  # replayed from the store
    store = Store.open_existing(first.store_path)
    try:  # the read-only replay (calib tables) gives the run's verdicts, nothing run
        replayed = replay_searches(load_spec(spec), store)
    finally:
        store.close()
    assert [(c.search.safe_k, [(s.k, s.trials, s.successes, s.verdict) for s in c.search.steps]) for c in replayed] \
        == _verdicts(first) and not any(c.interrupted for c in replayed)
    capsys.readouterr()
    assert main(["tables", str(first.store_path), "--tau", "1e-6"]) == 0  # the table shows the tested k
    text = capsys.readouterr().out
    listed = {int(line.split("=")[1].split()[0]) for line in text.splitlines() if line.startswith("   k=")}
    assert listed == {step.k for step in cell.search.steps}
    assert "safe k = 3: success rate >= 0.7" in text and "bisection assumes" in text and "not a proof" in text

    # the same campaign grown into a grid: every search trial inside the grid is reused, in the same store
    grid = _spec(tmp_path, k="[1, 2, 3, 6, 12]", target="")
    grown = run_campaign(load_spec(grid), tmp_path / "out", inline=True)
    assert grown.store_path == first.store_path
    assert grown.planned == 5 * 2 * 20 and grown.skipped + grown.ran == grown.planned
    assert grown.skipped == len(searched) and searched <= _trial_ids(grown.store_path)


def test_a_search_after_a_grid_starts_from_what_is_stored(tmp_path):
    grid = run_campaign(load_spec(_spec(tmp_path, k="[1, 2, 3, 6, 12]", target="")), tmp_path / "a", inline=True)
    after = run_campaign(load_spec(_spec(tmp_path)), tmp_path / "a", inline=True)
    fresh = run_campaign(load_spec(_spec(tmp_path)), tmp_path / "b", inline=True)
    assert _verdicts(after) == _verdicts(fresh)  # same trials, same outcomes, same decisions
    assert after.skipped > 0 and after.ran == fresh.ran - after.skipped
    assert grid.ran + after.ran == len(_trial_ids(after.store_path))


def test_growing_replicates_reuses_the_stored_trials(tmp_path):
    grid = "[2, 4]"
    small = run_campaign(load_spec(_spec(tmp_path, replicates=6, k=grid, target="")), tmp_path / "out", inline=True)
    before = _trial_ids(small.store_path)
    grown = run_campaign(load_spec(_spec(tmp_path, replicates=15, k=grid, target="")), tmp_path / "out", inline=True)
    assert grown.store_path == small.store_path and len(before) == 2 * 2 * 6
    assert grown.skipped == len(before) and grown.ran == 2 * 2 * 15 - len(before)
    with sqlite3.connect(grown.store_path) as db:
        meta = dict(db.execute("SELECT key, value FROM campaign"))
    assert '"replicates":15' in meta["spec"] and len(json.loads(meta["grown_from"])) == 1


def test_a_change_that_alters_stored_trials_is_refused(tmp_path, capsys):
    spec = _spec(tmp_path, replicates=2, k="[2]", target="")
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--quiet", "--in-process"]) == 0
    store = tmp_path / "out" / "srch.sqlite"
    before = store.read_bytes()
    spec.write_text(spec.read_text().replace("root_seed = 77", "root_seed = 78"))
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "campaign.root_seed changes from 77 to 78" in err[0] and "--new-campaign" in err[0]
    spec.write_text(spec.read_text().replace("root_seed = 78", "root_seed = 77") + "\n[solver]\ntime_limit_s = 5\n")
    assert main(["run", str(spec), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    assert "[solver] changes" in capsys.readouterr().err
    assert store.read_bytes() == before


def test_added_retrieval_runs_only_for_the_missing_rows(tmp_path):
    base = _spec(tmp_path, replicates=2, k="[3]", target="")
    first = run_campaign(load_spec(base), tmp_path / "out", inline=True)
    # the spec names no retrieval: its trials ran the LP default, completion
    grown_text = base.read_text().replace('k = [3]', 'k = [3]\nretrievals = ["completion", "alternating"]')
    base.write_text(grown_text)
    grown = run_campaign(load_spec(base), tmp_path / "out", inline=True)
    with sqlite3.connect(grown.store_path) as db:
        rows = db.execute("SELECT retrieval, COUNT(*) FROM trials GROUP BY retrieval").fetchall()
    assert dict(rows) == {"completion": first.ran, "alternating": first.ran} and grown.ran == first.ran


def test_search_target_predicate_is_the_table_predicate():
    # the run-time rule is calib.verdicts.success.make_predicate with the [target] tolerance
    from calib.verdicts.success import make_predicate, with_tau

    spec = parse_spec(_raw())
    assert spec.target.predicate == with_tau(make_predicate("bound"), 1e-6)
    with pytest.raises(InputError):
        make_predicate("nope")


@pytest.fixture(scope="module")
def search_reference(tmp_path_factory):
    folder = tmp_path_factory.mktemp("search-reference")
    return run_campaign(load_spec(_spec(folder)), folder / "out", inline=True)


@pytest.mark.parametrize("mode, count", [("mid-trial-transaction", 9), ("after-trial-commit", 20)])
def test_kill9_during_a_search_then_resume_loses_and_duplicates_nothing(tmp_path, search_reference, mode, count):
    import os
    import signal
    import subprocess
    import sys
    from pathlib import Path

    driver = Path(__file__).with_name("engine_kill_driver.py")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(Path(__file__).resolve().parents[1]), str(driver.parent)])}
    spec = _spec(tmp_path)
    reference = search_reference
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, str(driver), mode, str(count), "run", str(spec), "--out", str(out),
                           "--workers", "2", "--quiet"], env=env, capture_output=True, text=True, timeout=120)
    assert done.returncode == -signal.SIGKILL, done.stderr
    store = out / "srch.sqlite"
    with sqlite3.connect(store) as db:
        stored = db.execute("SELECT COUNT(*) FROM trials").fetchone()[0]
    assert stored < reference.ran
    resumed = run_campaign(load_spec(spec), out, workers=2)
    assert _verdicts(resumed) == _verdicts(reference)
    assert resumed.skipped == stored and resumed.skipped + resumed.ran == reference.ran
    with sqlite3.connect(store) as db:
        rows, distinct = db.execute("SELECT COUNT(*), COUNT(DISTINCT trial_id) FROM trials").fetchone()
    assert rows == distinct == reference.ran and _trial_ids(store) == _trial_ids(reference.store_path)


def test_the_example_search_spec_reads():
    from pathlib import Path

    spec = load_spec(Path(__file__).resolve().parents[1] / "instances" / "quickstart-search.toml")
    assert spec.k_grid.is_search and spec.target.rate == pytest.approx(0.9)


# ----- the whole range: above high up to m - 1 -----------------------------------------------

def _all_at(curve, search: KSearch) -> KSearch:
    while (demand := search.demand()) is not None:
        k, count = demand
        search.offer([curve(k)] * count)
    return search


def test_a_failing_high_end_goes_on_up_to_m_minus_1():
    # a sharp curve safe from k = 70 on, searched on [1, 40] of m = 100: the old search said "widen the
    # range"; the extended one brackets [40, 99] and finds 70 (module text: one run bisects one bracket)
    search = _all_at(lambda k: k >= 70, KSearch(1, 40, 0.9, 0.95, 80, top=99))
    assert search.safe_k == 70 and search.steps[0].k == 40 and search.steps[1].k == 99
    assert search.looks == max(max_looks(1, 40), max_looks(40, 99))
    assert all(step.k >= 40 for step in search.steps)  # low is not tested once high failed
    nothing = _all_at(lambda k: False, KSearch(1, 40, 0.9, 0.95, 80, top=99))
    assert nothing.safe_k is None and "no k below m = 100 is shown to meet the target" in nothing.reason
    assert [step.k for step in nothing.steps] == [40, 99]
    old = _all_at(lambda k: k >= 70, KSearch(1, 40, 0.9, 0.95, 80))  # top=None: stop at high
    assert old.safe_k is None and "widen the range" in old.reason


def test_extend_is_a_search_option():
    assert parse_spec(_raw()).k_grid.extend
    assert not parse_spec(_raw(sweep__k={"search": {"low": 1, "high": 6, "extend": False}})).k_grid.extend
    with pytest.raises(SpecError, match="sweep.k.search.extend"):
        parse_spec(_raw(sweep__k={"search": {"low": 1, "high": 6, "extend": "yes"}}))


def test_a_curtailed_look_fails_with_the_verdict_of_its_last_look():
    # at the bisection's level on [1, 40] (1 - 0.01/8/2) 80 of 80 are needed at the cap of 80
    # (0.9^80 = 2.2e-4 <= 6.25e-4 < P(Binomial(80, 0.9) >= 79) = 2.2e-3, scipy.stats.binom): the
    # first failure decides, whatever follows
    search = KSearch(1, 40, 0.9, 0.95, 80)
    search.offer([False] + [True] * 79)
    assert search.steps[0].verdict.startswith("fail") and search.steps[0].trials == 1
    assert stats.binom.sf(78, 80, 0.9) > search.alpha / 2 >= stats.binom.sf(79, 80, 0.9)


def test_a_store_from_before_the_extension_keeps_its_searches_at_high(tmp_path):
    """A store without the extension marker replays as it was run; a new store records the marker.

    The check reads the campaign table with sqlite3 directly (the standard library as the reader).
    """
    import sqlite3

    from calib.store.database import SEARCH_EXTENDS, Store
    from calib.sweep.runner import search_cells
    from calib.sweep.spec import load_spec

    path = tmp_path / "marker.toml"
    path.write_text("""
[campaign]
name = "marker"
root_seed = 3
replicates = 1
[[families]]
name = "lp-planted"
sizes = [{rows = 20, cols = 40}]
instances = 1
[sweep]
projectors = ["gaussian"]
k = {search = {low = 2, high = 10}}
[target]
preset = "bound"
""", encoding="utf-8")
    spec = load_spec(path)
    store = Store.create_or_resume(spec, tmp_path / "out")
    store_path = store.path
    try:
        assert store.searches_extend()
    finally:
        store.close()
    with sqlite3.connect(store_path) as db:
        assert db.execute("SELECT value FROM campaign WHERE key = ?", (SEARCH_EXTENDS,)).fetchone() == ("1",)
        db.execute("DELETE FROM campaign WHERE key = ?", (SEARCH_EXTENDS,))
    store = Store.open_existing(store_path)
    try:
        assert not store.searches_extend()
    finally:
        store.close()
    assert [cell.search.top for cell in search_cells(spec, extend=False)] == [None]
    assert [cell.search.top for cell in search_cells(spec)] == [19]
