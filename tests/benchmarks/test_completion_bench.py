"""The completion retrieval on median regression at 20,000 and 10^5 rows: usable rate, time, safe k.

Campaigns: ``instances/bench/quantile-completion.toml`` (20,000 x 5, 29 instances, CountSketch at
k = 0.5% ... 10% of m), ``quantile-completion-large.toml`` (10^5 x 5, 8 instances x 4 replicates)
and ``quantile-completion-srht.toml`` (SRHT at 0.5% and 1% of the 20,000 rows). Each projected
solve is retrieved twice, by ``completion`` (the coefficients kept, the residuals completed) and by
``basis-lstsq`` (the retrieval the tables used before), and judged under ``usable`` at 5% (the
point's objective, feasibility and sign errors within 5%) and ``policy`` (usable and faster end to
end than the original by HiGHS interior point, its fastest method on this class).

Goals (asserted): at 20,000 rows a CountSketch safe k of at most 5% of m for the class with a
usable rate >= 0.9 there, and the end-to-end pipeline at least 5x faster than the original at that
k. The measured table is printed. Run with ``make bench`` or, alone,
``python tests/benchmarks/test_completion_bench.py [--skip-large] [--out DIR]`` (about 10 min for
the 20,000-row campaigns and 10 more for 10^5 rows on two cores).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SPECS = {"20k": ROOT / "instances" / "bench" / "quantile-completion.toml",
         "20k-srht": ROOT / "instances" / "bench" / "quantile-completion-srht.toml",
         "100k": ROOT / "instances" / "bench" / "quantile-completion-large.toml"}
TAU = 0.05


def run(name: str, out: Path, workers: int = 2) -> Path:
    """Run one campaign (resumable) and return its store."""
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec

    return run_campaign(load_spec(SPECS[name]), out, workers=workers).store_path


def measure(store_path: Path, preset: str) -> list[dict]:
    """Per (projector, retrieval, k): usable rate, median end to end, baseline, speed-up; and the safe k."""
    from calib.analysis.rows import load_rows
    from calib.analysis.tables import build_analysis
    from calib.analysis.timing import timing_frame
    from calib.store.database import Store
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import make_predicate

    store = Store.open_existing(store_path)
    try:
        rows = load_rows(store)
    finally:
        store.close()
    analysis = build_analysis(rows, make_predicate(preset, obj=TAU, feas=TAU, sign=TAU), Confidence(0.1, 0.95))
    timings = timing_frame(rows, analysis).set_index(["projector", "retrieval", "k"])
    out = []
    for entry in analysis["entries"]:
        for point in entry["grid"]:
            timing = timings.loc[(entry["projector"], entry["retrieval"], point["k"])]
            out.append({"size": entry["size"], "m": entry["projected_dim"], "projector": entry["projector"],
                        "retrieval": entry["retrieval"], "k": point["k"], "rate": point["rate"],
                        "trials": point["trials"], "safe_k": entry["safe_k"], "class_safe_k": entry["class"]["safe_k"],
                        "reduced_s": float(timing["reduced_median_s"]), "baseline_s": float(timing["baseline_median_s"]),
                        "speedup": float(timing["speedup"]), "preset": preset})
    return out


def render(rows: list[dict]) -> str:
    lines = [f"{'preset':7s} {'size':22s} {'projector':11s} {'retrieval':11s} {'k':>6s} {'k/m':>6s} {'usable':>7s} "
             f"{'trials':>6s} {'end-to-end':>10s} {'baseline':>8s} {'speed-up':>8s} {'safe k':>7s} {'class':>6s}"]
    for row in rows:
        lines.append(f"{row['preset']:7s} {row['size']:22s} {row['projector']:11s} {row['retrieval']:11s} {row['k']:>6d} "
                     f"{row['k'] / row['m']:>6.3f} {row['rate']:>7.3f} {row['trials']:>6d} {row['reduced_s']:>9.3f}s "
                     f"{row['baseline_s']:>7.3f}s {row['speedup']:>7.1f}x {str(row['safe_k']):>7s} {str(row['class_safe_k']):>6s}")
    return "\n".join(lines)


def check_goals(rows: list[dict]) -> list[str]:
    """The goals of the module docstring; returns the failures (empty: all met)."""
    cells = [row for row in rows if row["preset"] == "usable" and row["size"].startswith("rows=20000")
             and row["projector"] == "countsketch" and row["retrieval"] == "completion"]
    if not cells:
        return ["no 20,000-row CountSketch completion cell was measured"]
    safe = cells[0]["class_safe_k"]
    if safe is None or safe > 0.05 * cells[0]["m"]:
        return [f"class safe k {safe} is not within 5% of m = {cells[0]['m']}"]
    at = next(row for row in cells if row["k"] == safe)
    failures = []
    if at["rate"] < 0.9:
        failures.append(f"usable rate {at['rate']} < 0.9 at the safe k {safe}")
    if at["speedup"] < 5.0:
        failures.append(f"speed-up {at['speedup']:.1f}x < 5x at the safe k {safe}")
    return failures


@pytest.mark.parametrize("names", [("20k", "20k-srht", "100k")])
def test_completion_on_large_quantile_regression(benchmark, tmp_path, names):
    rows: list[dict] = []

    def campaign() -> None:
        for name in names:
            store = run(name, tmp_path)
            rows.extend(measure(store, "usable") + measure(store, "policy"))

    benchmark.pedantic(campaign, rounds=1, iterations=1)
    print("\n" + render(rows))
    benchmark.extra_info["rows"] = rows
    assert check_goals(rows) == []


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path("bench-completion"))
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--skip-large", action="store_true", help="only the 20,000-row campaigns")
    parser.add_argument("--json", type=Path, help="also write the measured rows here")
    args = parser.parse_args(argv)
    rows: list[dict] = []
    for name in ("20k", "20k-srht") + (() if args.skip_large else ("100k",)):
        store = run(name, args.out, args.workers)
        rows.extend(measure(store, "usable") + measure(store, "policy"))
        print(render(rows), flush=True)
    if args.json:
        args.json.write_text(json.dumps(rows, indent=1), encoding="utf-8")
    failures = check_goals(rows)
    print("goals met" if not failures else "goals missed: " + "; ".join(failures))
    return 0 if not failures else 1


if __name__ == "__main__":
    sys.exit(main())
