"""The k search against a full grid: trials, wall time and the safe k found, per case and root seed.

Run at full size with ``make bench`` (or ``pytest tests/benchmarks/test_search_bench.py
--benchmark-only -s``); a reduced run for a shared machine: ``python tests/benchmarks/test_search_bench.py
--reduced --seeds 3``. Cases (all with success rate >= 0.9 claimed at 95% confidence):

- (i) ``lp-basis-pursuit`` measurements = 150, length = 200, sparsity = 20, Gaussian projector,
  success = the projected optimum within 1e-6 of the original (the ``bound`` preset, gap 1e-6);
- (ii) ``lp-planted`` rows = 240, cols = 480, rank = 12, four projectors, same success rule;
- (iii) ``points-gaussian`` with 100 points in dimension 1,000, worst pairwise distortion <= 0.2.

Per case and root seed the same cells run twice into fresh stores: as a search on [low, high], and
as a grid of every 2nd k from low to high with the same instances and replicates (the search's cap
per k); the search runs on the same lattice (``step = 2``), so both answer on the same k values. The grid's safe k is the table's (one-sided Clopper–Pearson at each k, monotone rule, from
:mod:`calib.analysis.tables`). Goal: at least 5x fewer trials, and a search answer within one grid
step (2) of the grid's for at least 9 of 10 seeds (90% of the cells: seeds x projectors), both asserted
(a reduced run prints them and exits 1 when one is not met). Both are empirical answers on the
instances measured, not proofs.
"""

from __future__ import annotations

import argparse
import sys
import textwrap
import time
from pathlib import Path

import pytest

CASES = {
    # name: (family line, sizes, params, projectors, k range, [target] lines)
    "basis-pursuit": ('"lp-basis-pursuit"', "{measurements = 150, length = 200, sparsity = 20}", "{}", '["gaussian"]',
                      (10, 150), 'preset = "bound"\ntolerance = 1e-6'),
    "planted-4-projectors": ('"lp-planted"', "{rows = 240, cols = 480}", "{rank = 12}",
                             '["gaussian", "srht", "countsketch", "sparse-jl"]', (2, 240), 'preset = "bound"\ntolerance = 1e-6'),
    "points": ('"points-gaussian"', "{points = 100, dim = 1000}", "{}", '["gaussian"]', (10, 1000),
               'preset = "distortion"\ntolerance = 0.2'),
    # a family the search was not tuned on: sparse 0/1 vectors, CountSketch
    "points-binary": ('"points-binary"', "{points = 100, dim = 1000}", "{density = 0.05}", '["countsketch"]', (10, 1000),
                      'preset = "distortion"\ntolerance = 0.2'),
}

#: the reduced run for a shared 2-core machine: the same families and success rules, smaller sizes
REDUCED = {
    "basis-pursuit": ("{measurements = 60, length = 80, sparsity = 8}", (4, 60)),
    "planted-4-projectors": ("{rows = 60, cols = 120}", (2, 60)),
    "points": ("{points = 20, dim = 1000}", (200, 1000)),  # 20 points: a safe k near 600, inside the range
    "points-binary": ("{points = 20, dim = 600}", (100, 600)),
}

INSTANCES, REPLICATES = 2, 40  # cap per k: 80 trials
#: the grid's spacing, and the search's lattice step: both answer on the same k values
GRID_STEP = 2
#: the goals (module docstring): grid trials / search trials, and the share of cells whose answers agree
TRIAL_RATIO_GOAL, SAME_SHARE_GOAL = 5.0, 0.9

SPEC = """
[campaign]
name = "{name}"
root_seed = {seed}
replicates = {replicates}

[[families]]
name = {family}
sizes = [{size}]
instances = {instances}
params = {params}

[sweep]
projectors = {projectors}
k = {k}

{target}
"""


def _spec(folder: Path, name: str, case: str, seed: int, reduced: bool, search: bool):
    from calib.sweep.spec import load_spec

    family, size, params, projectors, (low, high), target = CASES[case]
    if reduced:
        size, (low, high) = REDUCED[case]
    k = f"{{search = {{low = {low}, high = {high}, step = {GRID_STEP}}}}}" if search else str(list(range(low, high + 1, GRID_STEP)))
    text = SPEC.format(name=name, seed=seed, replicates=REPLICATES, family=family, size=size, instances=INSTANCES,
                       params=params, projectors=projectors, k=k, target=f"[target]\n{target}" if search else "")
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{name}.toml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return load_spec(path)


def grid_safe_k(store_path: Path, predicate, delta: float, level: float) -> dict:
    """projector -> the table's safe k (instances scope) of the (single-size) grid."""
    from calib.analysis.tables import build_table
    from calib.store.database import Store
    from calib.verdicts.saferule import Confidence

    store = Store.open_existing(store_path)
    try:
        table = build_table(store, predicate, Confidence(delta, level))
    finally:
        store.close()
    return {entry["projector"]: entry["safe_k"] for entry in table["analyses"][0]["entries"]}


def compare(case: str, seed: int, folder: Path, reduced: bool, workers: int) -> list[dict]:
    """Search and grid on fresh stores; one row per projector."""
    from calib.sweep.runner import run_campaign

    search_spec = _spec(folder, f"search-{case}-{seed}", case, seed, reduced, search=True)
    grid_spec = _spec(folder, f"grid-{case}-{seed}", case, seed, reduced, search=False)
    start = time.perf_counter()
    search = run_campaign(search_spec, folder / "search", workers=workers)
    search_s = time.perf_counter() - start
    start = time.perf_counter()
    grid = run_campaign(grid_spec, folder / "grid", workers=workers)
    grid_s = time.perf_counter() - start
    target = search_spec.target
    from_grid = grid_safe_k(grid.store_path, target.predicate, target.delta, target.confidence)
    rows = []
    for cell in search.searches:
        grid_k = from_grid.get(cell.projector.label)
        same = (grid_k is None and cell.search.safe_k is None) or (
            grid_k is not None and cell.search.safe_k is not None and abs(grid_k - cell.search.safe_k) <= GRID_STEP)
        rows.append({"case": case, "seed": seed, "projector": cell.projector.label,
                     "search_trials": cell.search.trials_read, "grid_trials": grid.ran // len(search_spec.projectors),
                     "search_k": cell.search.safe_k, "grid_k": grid_k, "same": same,
                     "search_s": search_s, "grid_s": grid_s, "run_search_trials": search.ran, "run_grid_trials": grid.ran})
    return rows


def render(rows: list[dict]) -> str:
    lines = [f"{'case':22s} {'seed':>4s} {'projector':12s} {'search':>7s} {'grid':>7s} {'ratio':>6s} "
             f"{'k search':>8s} {'k grid':>7s} {'same':>5s} {'t search':>9s} {'t grid':>8s}"]
    for row in rows:
        lines.append(f"{row['case']:22s} {row['seed']:>4d} {row['projector']:12s} {row['search_trials']:>7d} "
                     f"{row['grid_trials']:>7d} {row['grid_trials'] / max(1, row['search_trials']):>6.1f} "
                     f"{str(row['search_k']):>8s} {str(row['grid_k']):>7s} {str(row['same']):>5s} "
                     f"{row['search_s']:>8.1f}s {row['grid_s']:>7.1f}s")
    for case in dict.fromkeys(row["case"] for row in rows):
        grid, search, same, cells = case_totals(rows, case)
        lines.append(f"{case}: {grid} grid trials / {search} search trials = {grid / max(1, search):.1f}x fewer "
                     f"(goal >= {TRIAL_RATIO_GOAL:g}x); same safe k within one grid step in {same} of {cells} cells "
                     f"(goal >= {SAME_SHARE_GOAL:.0%})")
    return "\n".join(lines)


def case_totals(rows: list[dict], case: str) -> tuple[int, int, int, int]:
    """(grid trials, search trials, cells with the same safe k within one grid step, cells) of one case.

    The trials are the whole runs' (every projector of a seed), summed over the seeds.
    """
    picked = [row for row in rows if row["case"] == case]
    first = [row for row in picked if row["projector"] == picked[0]["projector"]]  # one row per seed
    return (sum(row["run_grid_trials"] for row in first), sum(row["run_search_trials"] for row in first),
            sum(row["same"] for row in picked), len(picked))


def check_goals(rows: list[dict]) -> list[str]:
    """The goals of the module docstring, per case; returns the failures (empty: all met)."""
    failures = []
    for case in dict.fromkeys(row["case"] for row in rows):
        grid, search, same, cells = case_totals(rows, case)
        if grid < TRIAL_RATIO_GOAL * search:
            failures.append(f"{case}: {grid} grid trials / {search} search trials = {grid / max(1, search):.1f}x "
                            f"fewer, goal >= {TRIAL_RATIO_GOAL:g}x")
        if same < SAME_SHARE_GOAL * cells:
            failures.append(f"{case}: the same safe k within one grid step in {same} of {cells} cells, "
                            f"goal >= {SAME_SHARE_GOAL:.0%}")
    return failures


@pytest.mark.parametrize("case", sorted(CASES))
def test_search_against_grid(benchmark, tmp_path, case):
    seeds = range(1, 11)
    rows: list[dict] = []

    def run() -> None:
        for seed in seeds:
            rows.extend(compare(case, seed, tmp_path / str(seed), reduced=False, workers=2))

    benchmark.pedantic(run, rounds=1, iterations=1)
    print("\n" + render(rows))
    benchmark.extra_info["rows"] = rows
    assert check_goals(rows) == []


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--reduced", action="store_true")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--cases", nargs="+", default=sorted(CASES))
    parser.add_argument("--out", type=Path, default=Path("bench-search"))
    args = parser.parse_args(argv)
    rows = []
    for case in args.cases:
        for seed in range(1, args.seeds + 1):
            rows.extend(compare(case, seed, args.out / case / str(seed), args.reduced, args.workers))
            print(render(rows[-1:]).splitlines()[1], flush=True)
    print(render(rows))
    failures = check_goals(rows)
    print("\n".join(["goals not met:", *failures]) if failures else "goals met")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
