"""Campaign engine benchmarks (pytest-benchmark; skipped in normal runs).

Run: ``pytest tests/benchmarks/test_engine_bench.py --benchmark-only -s``. Each benchmark prints its
numbers and stores them in ``extra_info``:

- throughput of a 200-trial campaign on 1 and 2 local workers (target: speed-up >= 1.8 on 2 cores);
- runner overhead per trial against the time spent inside trials (target: < 5 % for trials of
  >= 50 ms);
- the cost of resuming a campaign that has nothing left to do (20 000 stored trials).
"""

from __future__ import annotations

import sqlite3
import statistics
import time
from pathlib import Path

import pytest

from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec

#: 2 instances x 4 k x 25 replicates = 200 trials of ~20-150 ms (dense 200 x 400 LPs)
THROUGHPUT_SPEC = """
[campaign]
name = "bench"
root_seed = 5
replicates = 25

[[families]]
name = "lp-planted"
sizes = [{rows = 200, cols = 400}]
instances = 2

[sweep]
projectors = ["gaussian"]
k = [60, 80, 100, 120]

[solver]
time_limit_s = 60
"""


def _spec(folder: Path, text: str, name: str = "bench"):
    path = folder / f"{name}.toml"
    path.write_text(text.replace('name = "bench"', f'name = "{name}"'), encoding="utf-8")
    return load_spec(path)


def _inside_seconds(store: Path) -> tuple[float, float, int]:
    """(seconds inside trials, seconds building and solving originals, trials) from the store."""
    with sqlite3.connect(store) as db:
        trial_seconds = [row[0] for row in db.execute("SELECT seconds FROM trials")]
        originals = db.execute("SELECT SUM(orig_seconds) + SUM(build_seconds) FROM instances").fetchone()[0]
    return sum(trial_seconds), originals or 0.0, len(trial_seconds)


def test_throughput_one_and_two_workers(benchmark, tmp_path):
    walls = {}

    def run_both():
        for workers in (1, 2):
            start = time.perf_counter()
            run_campaign(_spec(tmp_path, THROUGHPUT_SPEC, f"w{workers}"), tmp_path / f"out{workers}", workers=workers)
            walls[workers] = time.perf_counter() - start

    benchmark.pedantic(run_both, rounds=1, iterations=1)
    speedup = walls[1] / walls[2]
    benchmark.extra_info.update({"wall_1_worker_s": walls[1], "wall_2_workers_s": walls[2], "speedup": speedup,
                                 "trials_per_s_1": 200 / walls[1], "trials_per_s_2": 200 / walls[2]})
    print(f"\n200 trials: 1 worker {walls[1]:.2f} s ({200 / walls[1]:.1f}/s), 2 workers {walls[2]:.2f} s "
          f"({200 / walls[2]:.1f}/s), speed-up {speedup:.2f}")


def test_runner_overhead_per_trial(benchmark, tmp_path):
    """Overhead = wall time not spent inside a trial or an original solve, per trial, on 1 worker."""
    text = THROUGHPUT_SPEC.replace("k = [60, 80, 100, 120]", "k = [100, 120]").replace("replicates = 25", "replicates = 20")
    numbers = {}

    def run_once():
        start = time.perf_counter()
        summary = run_campaign(_spec(tmp_path, text, "overhead"), tmp_path / "out", workers=1)
        numbers["wall"] = time.perf_counter() - start
        numbers["store"] = summary.store_path

    benchmark.pedantic(run_once, rounds=1, iterations=1)
    inside, originals, trials = _inside_seconds(numbers["store"])
    startup = _worker_startup_seconds()
    overhead = (numbers["wall"] - inside - originals - startup) / trials
    mean_trial = inside / trials
    benchmark.extra_info.update({"mean_trial_s": mean_trial, "overhead_per_trial_s": overhead,
                                 "overhead_fraction": overhead / mean_trial, "worker_startup_s": startup})
    print(f"\n{trials} trials of {mean_trial * 1e3:.1f} ms on average: overhead {overhead * 1e3:.2f} ms per trial "
          f"({100 * overhead / mean_trial:.2f} %), plus a one-off worker start of {startup:.2f} s")


def _worker_startup_seconds() -> float:
    from calib.sweep.sandbox import Sandbox

    times = []
    for _ in range(3):
        start = time.perf_counter()
        box = Sandbox()
        box.wait_ready()
        times.append(time.perf_counter() - start)
        box.close()
    return statistics.median(times)


@pytest.mark.parametrize("trials", [20_000])
def test_resume_with_nothing_to_do(benchmark, tmp_path, trials):
    """Resume a complete store: expand the spec, read the stored ids, run nothing."""
    from calib.store.database import Store
    from calib.sweep.expansion import expand

    text = THROUGHPUT_SPEC.replace("instances = 2", "instances = 10").replace(
        "k = [60, 80, 100, 120]", "k = [10, 20, 30, 40, 50, 60, 70, 80, 90, 100]").replace("replicates = 25", "replicates = 200")
    spec = _spec(tmp_path, text, "resume")
    store = Store.create_or_resume(spec, tmp_path / "out")
    with store.transaction():  # fabricated rows: only their ids matter to a resume
        store.db.executemany(
            "INSERT INTO trials (trial_id, retrieval, instance_id, projector, projector_options, k, replicate, status,"
            " stream_key, env_id) VALUES (?, 'basis-lstsq', ?, 'gaussian', '{}', ?, ?, 'ok', '[]', 'x')",
            [(trial.trial_id, ref.instance_id, trial.k, trial.replicate) for ref, batch in expand(spec) for trial in batch])
    store.close()
    summary = benchmark.pedantic(lambda: run_campaign(spec, tmp_path / "out", workers=2), rounds=3, iterations=1)
    assert summary.ran == 0 and summary.skipped == trials
    print(f"\nresume of {trials} stored trials with nothing to do: {benchmark.stats.stats.median:.3f} s")
