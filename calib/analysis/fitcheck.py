"""Does a model resemble the instances behind an answer? Its features against their measured range.

A safe k holds for the class its instances were drawn from; a model of another kind of structure
can behave quite differently at the same size (a real LP in a planted-rank class, say). The check
compares the structure of the user's sketched matrix (:mod:`calib.features`) with that of the
instances behind the answer: the per-size feature medians of the class's measured sizes.

Features compared (all positive; compared on a log scale, where a factor is a distance):

- ``rank``, ``stable_rank``, ``row_coherence`` of the sketched matrix M (m x N);
- ``density`` = nonzeros / (m N) and ``aspect`` = N / m.

The sizes themselves (m, N, nonzeros) are not compared: a size outside the measured ones is an
extrapolation of the law, which the answer flags on its own.

For each feature, with [lo, hi] the range of ln value over the measured sizes and the *spread*
s = max(hi - lo, ln 2) (the medians carry no within-size spread, so a single value is widened to
a factor of 2, a stated convention), the model's ln value v is

- *inside* when lo <= v <= hi (distance 0);
- *near* when it lies beyond the range by at most one spread (distance (v - hi) / s or
  (lo - v) / s, at most 1): the answer is shown, flagged;
- *outside* when it lies beyond by more than one spread: the answer is withheld unless forced,
  with the next step (measure the model itself: ``calib probe FILE --find-k``).

A feature the model or the measured sizes lack (rank and row coherence are skipped for large
matrices) is *not compared*, and said so. Costs: O(features x sizes).
"""

from __future__ import annotations

import math
from typing import Optional

#: the features compared, in order (module text)
CHECKED = ("rank", "stable_rank", "row_coherence", "density", "aspect")
#: the smallest spread of a feature's measured range on the ln scale: a factor of 2
SPREAD_FLOOR = math.log(2.0)
#: distances (in spreads beyond the range) up to this are "near", beyond it "outside"
NEAR = 1.0


def derived(features: Optional[dict]) -> dict:
    """The compared features of one feature record (rows, cols, nonzeros, rank, ...); None where missing.

    >>> derived({"rows": 10, "cols": 20, "nonzeros": 50, "rank": 5, "stable_rank": 2.0, "row_coherence": 1.5})
    {'rank': 5.0, 'stable_rank': 2.0, 'row_coherence': 1.5, 'density': 0.25, 'aspect': 2.0}
    """
    features = features or {}
    rows, cols, nonzeros = (features.get(name) for name in ("rows", "cols", "nonzeros"))
    sized = rows is not None and cols is not None and rows > 0 and cols > 0
    out = {name: None if features.get(name) is None else float(features[name]) for name in CHECKED[:3]}
    out["density"] = float(nonzeros) / (rows * cols) if sized and nonzeros is not None else None
    out["aspect"] = float(cols) / rows if sized else None
    return out


def measured_ranges(records: list[Optional[dict]]) -> dict:
    """Per compared feature, [min, max] over the measured records (per-size medians), or None."""
    values = [derived(record) for record in records if record]
    ranges = {}
    for name in CHECKED:
        seen = [value[name] for value in values if value[name] is not None and value[name] > 0]
        ranges[name] = [min(seen), max(seen)] if seen else None
    return ranges


def compare(model: dict, ranges: dict) -> dict:
    """The fit check of one model's features (a feature record) against measured ranges (module text).

    >>> ranges = {"rank": [10.0, 10.0], "stable_rank": [2.2, 2.7], "row_coherence": [1.7, 2.7],
    ...           "density": [1.0, 1.0], "aspect": [2.0, 2.7]}
    >>> check = compare({"rows": 27, "cols": 52, "nonzeros": 109, "rank": 27, "stable_rank": 1.0, "row_coherence": 1.0}, ranges)
    >>> check["verdict"], check["features"]["density"]["position"], round(check["features"]["rank"]["distance"], 2)
    ('outside', 'outside', 1.43)
    """
    values = derived(model)
    report, outside, near, skipped = {}, [], [], []
    for name in CHECKED:
        value, bounds = values[name], ranges.get(name)
        if value is None or value <= 0 or bounds is None:
            report[name] = {"value": value, "low": None if bounds is None else bounds[0],
                            "high": None if bounds is None else bounds[1], "position": "not compared", "distance": None}
            skipped.append(name)
            continue
        low, high = (math.log(bound) for bound in bounds)
        spread = max(high - low, SPREAD_FLOOR)
        v = math.log(value)
        distance = (v - high) / spread if v > high else ((low - v) / spread if v < low else 0.0)
        position = "inside" if distance == 0.0 else ("near" if distance <= NEAR else "outside")
        report[name] = {"value": float(f"{value:.6g}"), "low": bounds[0], "high": bounds[1], "position": position,
                        "distance": float(f"{distance:.4g}")}
        (outside if position == "outside" else near if position == "near" else []).append(name)
    verdict = "outside" if outside else ("near" if near else ("fits" if len(skipped) < len(CHECKED) else "not compared"))
    return {"verdict": verdict, "features": report, "outside": outside, "near": near, "not_compared": skipped,
            "reason": _reason(report, outside, near, skipped)}


def _describe(name: str, item: dict) -> str:
    side = "above" if item["value"] > item["high"] else "below"
    return (f"{name} {item['value']:.4g} is {item['distance']:.2g} spreads {side} the measured "
            f"{item['low']:.4g}..{item['high']:.4g}")


def _reason(report: dict, outside: list, near: list, skipped: list) -> str:
    parts = [_describe(name, report[name]) for name in outside + near]
    if skipped:
        parts.append(f"not compared: {', '.join(skipped)}")
    if not outside and not near:
        parts.insert(0, "every compared feature lies inside the measured range")
    return "; ".join(parts)
