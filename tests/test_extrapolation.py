"""Held-out checks of the law k = a + C ln n (calib.analysis.extrapolation).

The law of the small sizes is checked against numpy.polyfit (degree 1 in ln n), an outside
least-squares fit; the table dicts are built here in the shape `calib tables --json` writes
(docs/tables.md), with invented numbers.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from calib.analysis.extrapolation import held_out_checks, ratio_text, worst_ratio


def _analysis(points: list[tuple[str, int, int, object]]) -> dict:
    """One class of an analysis: (size, n, m, class safe k or None for censored)."""
    law_points = [{"size": size, "n": n, "safe_k": k, "censored": k is None,
                   "censoring": "no tested k reaches the target" if k is None else "", "residual": 0.0}
                  for size, n, _, k in points]
    entries = [{"family": "lp-demo", "class_params": {"tau": 0.5}, "size": size, "projected_dim": m}
               for size, _, m, _ in points]
    law = {"family": "lp-demo", "class_params": {"tau": 0.5}, "projector": "countsketch", "retrieval": "completion",
           "class_safe_k_law": {"points": law_points}}
    return {"entries": entries, "laws": [law]}


def test_the_largest_size_is_predicted_by_the_law_of_the_others_as_numpy_fits_it():
    points = [("rows=100", 201, 100, 20), ("rows=300", 601, 300, 26), ("rows=1000", 2001, 1000, 31),
              ("rows=3000", 6001, 3000, 40)]
    (check,) = held_out_checks(_analysis(points))
    slope, intercept = np.polyfit(np.log([201, 601, 2001]), [20, 26, 31], 1)  # outside reference
    expected = intercept + slope * math.log(6001)
    assert check.size == "rows=3000" and check.fitted_sizes == ("rows=100", "rows=300", "rows=1000")
    assert check.predicted == pytest.approx(expected, rel=1e-12)
    assert check.ratio == pytest.approx(40 / expected, rel=1e-12)
    assert ratio_text(check) == f"measured 40 against {expected:.0f} predicted (x{40 / expected:.3g})"


def test_a_tier_holds_out_every_size_at_or_above_its_rows_and_fits_below_it():
    points = [("rows=500", 1001, 500, 12), ("rows=2000", 4001, 2000, 15), ("rows=10000", 20001, 10000, 19),
              ("rows=30000", 60001, 30000, None)]
    checks = held_out_checks(_analysis(points), tier_rows=10_000)
    assert [check.size for check in checks] == ["rows=10000", "rows=30000"]
    assert all(check.fitted_sizes == ("rows=500", "rows=2000") for check in checks)
    slope, intercept = np.polyfit(np.log([1001, 4001]), [12, 15], 1)
    assert checks[0].predicted == pytest.approx(intercept + slope * math.log(20001), rel=1e-12)
    assert checks[1].measured is None and checks[1].ratio is None and "no k met the target" in checks[1].reason
    assert worst_ratio(checks) == pytest.approx(19 / checks[0].predicted)


def test_no_law_and_no_reduction_are_said_not_divided():
    censored = [("rows=10", 21, 10, None), ("rows=30", 61, 30, None), ("rows=90", 181, 90, None)]
    (check,) = held_out_checks(_analysis(censored))
    assert check.predicted is None and check.ratio is None and "no law to check" in check.reason
    steep = [("rows=10", 21, 10, 2), ("rows=30", 61, 30, 20), ("rows=24", 81, 24, 23)]  # law: 24.8 at n = 81
    (check,) = held_out_checks(_analysis(steep))
    assert check.predicted == pytest.approx(20 + 18 / math.log(61 / 21) * math.log(81 / 61), rel=1e-12)
    assert "predicts no reduction" in check.reason and "m = 24" in check.reason
    assert held_out_checks(_analysis(censored[:2])) == []  # two sizes: nothing to hold out and still fit


def test_lookup_quotes_how_far_one_step_of_extrapolation_was_off_on_the_class(capsys):
    """On the shipped atlas: the law of the three smaller basis-pursuit sizes (numpy.polyfit in ln n,
    the outside reference) against the largest one, quoted by `calib lookup` beside its EXTRAPOLATED flag."""
    import json
    from pathlib import Path

    from calib.cli import main

    table_path = Path(__file__).resolve().parents[1] / "results" / "atlas" / "safe_k.json"
    if not table_path.is_file():
        pytest.skip("no atlas shipped")
    analysis = json.loads(table_path.read_text(encoding="utf-8"))["analyses"][0]
    entries = sorted((e for e in analysis["entries"] if e["family"] == "lp-basis-pursuit" and e["projector"] == "gaussian"),
                     key=lambda e: e["n_points"])
    n = [e["n_points"] for e in entries]
    ks = [e["class"]["safe_k"] for e in entries]
    slope, intercept = np.polyfit(np.log(n[:-1]), ks[:-1], 1)
    predicted = intercept + slope * math.log(n[-1])
    assert main(["lookup", str(table_path), "--family", "lp-basis-pursuit", "--projector", "gaussian",
                 "--size", "measurements=4000,length=8000"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert (f"the law of the smaller sizes gave k = {predicted:.0f} at its largest measured size, where {ks[-1]} was "
            f"measured (x{ks[-1] / predicted:.3g})") in out
