"""Does a law fitted on small sizes predict a larger one? Held-out checks of k = a + C ln n.

A safe-k table carries, per class (family, class parameters, projector, retrieval), the class safe
k measured at each size and the law k = a + C ln n fitted through them (:mod:`calib.analysis.law`,
n the JL point count of the size). A user with a larger model reads the law at its n: an
extrapolation. This module measures how far that reading can be trusted on the table's own data:
for each class it fits the law on the *small* sizes only (those with n below the held-out size's)
and compares the prediction with what was measured at the held-out size,

    predicted = a_small + C_small ln n_held,    ratio = measured / predicted.

Which sizes are held out. With ``tier_rows`` given (for instance 10^4: the atlas's large tier),
every size whose projected dimension m is at least ``tier_rows`` is held out and the law is fitted
on the sizes below it; without it, the largest size of each class is held out (the table's own
check of one step of extrapolation). The fit needs two uncensored small sizes; a held-out size
that met the target at no k ("censored": no k below m, or none in the searched range) is reported
as measured "none" with no ratio, and a prediction above m as "predicted no reduction".

Reading. ``ratio`` > 1: the law promised a smaller k than the class needs (an unsafe
extrapolation); < 1: it asked for more than needed (safe but wasteful). The ratio is that of two
empirical safe k values, each a claim at the table's confidence, not a confidence interval: a
ratio within the lattice step of the search (or the grid spacing) is agreement. Cost: O(sizes)
per class.

Reference for the law's form: the JL dimension k = O(eps^-2 ln n) (Johnson & Lindenstrauss 1984;
Dasgupta & Gupta 2003, "An elementary proof of a theorem of Johnson and Lindenstrauss").
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

from calib.analysis.law import censored_law


@dataclass(frozen=True)
class HeldOut:
    """One held-out size of one class: the law of the smaller sizes against the measured safe k.

    ``predicted`` is a + C ln n of the small sizes' law (None when they give no law), ``measured``
    the class safe k at the held-out size (None when none met the target), ``ratio`` measured /
    predicted when both exist and the prediction is positive.
    """

    family: str
    class_params: dict
    projector: str
    retrieval: str
    size: str
    n: int
    m: Optional[int]
    fitted_sizes: tuple
    predicted: Optional[float]
    measured: Optional[int]
    reason: str

    @property
    def ratio(self) -> Optional[float]:
        if self.predicted is None or self.measured is None or self.predicted <= 0:
            return None
        return self.measured / self.predicted

    def as_dict(self) -> dict:
        """JSON-ready fields (ratio and prediction rounded to 4 significant digits)."""
        return {"family": self.family, "class_params": self.class_params, "projector": self.projector,
                "retrieval": self.retrieval, "size": self.size, "n": self.n, "m": self.m,
                "fitted_sizes": list(self.fitted_sizes),
                "predicted": None if self.predicted is None else float(f"{self.predicted:.4g}"),
                "measured": self.measured, "ratio": None if self.ratio is None else float(f"{self.ratio:.4g}"),
                "reason": self.reason}


def _projected_dims(analysis: dict) -> dict:
    """(family, class params JSON-ish key, size) -> m, from the table's entries."""
    dims = {}
    for entry in analysis["entries"]:
        dims[(entry["family"], repr(sorted(entry["class_params"].items())), entry["size"])] = entry["projected_dim"]
    return dims


def held_out_checks(analysis: dict, tier_rows: Optional[int] = None) -> list[HeldOut]:
    """Every class of one analysis of a safe-k table (a dict as `calib tables --json` writes it),
    checked at its held-out sizes (module text). Classes with fewer than three sizes give none."""
    dims = _projected_dims(analysis)
    checks: list[HeldOut] = []
    for law in analysis["laws"]:
        points = sorted(law["class_safe_k_law"]["points"], key=lambda point: point["n"])
        key = (law["family"], repr(sorted(law["class_params"].items())))
        sized = [(point, dims.get(key + (point["size"],))) for point in points]
        if tier_rows is None:
            held = sized[-1:] if len(sized) >= 3 else []
        else:
            held = [(point, m) for point, m in sized if m is not None and m >= tier_rows]
        for point, m in held:
            small = [(p, dm) for p, dm in sized if p["n"] < point["n"] and (tier_rows is None or dm is None or dm < tier_rows)]
            checks.append(_check(law, point, m, [p for p, _ in small]))
    return checks


def _law_at(n: list[int], ks: list, censored: list[str], n_held: int) -> tuple[Optional[float], str]:
    """(a + C ln n_held of the law over the given sizes, or None; the law's reason when it has none)."""
    law = censored_law(n, ks, censored)
    return (law.at(n_held), "") if law.ok else (None, law.reason)


def _check(law: dict, point: dict, m: Optional[int], small: list[dict]) -> HeldOut:
    predicted, why = _law_at([p["n"] for p in small], [p["safe_k"] for p in small], [p["censoring"] for p in small],
                             point["n"])
    measured = None if point["censored"] or point["safe_k"] is None else int(point["safe_k"])
    if predicted is None and measured is None and all(p["censored"] for p in small):
        reason = "no k met the target at any size, so there is no law to check"
    elif predicted is None:
        reason = f"no law from the smaller sizes: {why}"
    elif m is not None and predicted > m:
        reason = f"the law predicts no reduction (k {predicted:.0f} above m = {m})"
    elif measured is None:
        reason = f"no k met the target at this size ({point['censoring'] or 'censored'})"
    else:
        reason = ""
    return HeldOut(law["family"], law["class_params"], law["projector"], law["retrieval"], point["size"],
                   int(point["n"]), m, tuple(p["size"] for p in small), predicted, measured, reason)


def largest_held_out(n: list[int], ks: list, censored: list[str]) -> Optional[tuple[float, int, float]]:
    """(law's k, measured k, measured / law) at the largest of the measured sizes ``n`` (JL point
    counts), the law fitted on the others (uncensored ones only); None with fewer than three sizes,
    no law, a censored largest size or a law at or below 0 there. What `calib lookup` quotes beside
    an extrapolation: how far one step of extrapolation was off on this class's own data.

    >>> largest_held_out([201, 601, 2001, 6001], [20, 26, 31, 40], ["", "", "", ""])[2] > 1
    True
    >>> largest_held_out([201, 601], [20, 26], ["", ""]) is None
    True
    """
    if len(n) < 3:
        return None
    order = sorted(range(len(n)), key=lambda index: n[index])
    *small, last = order
    if censored[last] or ks[last] is None:
        return None
    predicted, _ = _law_at([n[i] for i in small], [ks[i] for i in small], [censored[i] for i in small], n[last])
    if predicted is None or predicted <= 0:
        return None
    return predicted, int(ks[last]), ks[last] / predicted


def ratio_text(check: HeldOut) -> str:
    """One phrase: 'measured 49 against 38 predicted (x1.29)', or the reason there is no ratio.

    >>> ratio_text(HeldOut("f", {}, "countsketch", "completion", "rows=10", 100, 10, ("rows=5",), 38.0, 49, ""))
    'measured 49 against 38 predicted (x1.29)'
    """
    if check.ratio is None:
        measured = "none" if check.measured is None else str(check.measured)
        predicted = "none" if check.predicted is None else f"{check.predicted:.0f}"
        return f"measured {measured} against {predicted} predicted ({check.reason})"
    return f"measured {check.measured} against {check.predicted:.0f} predicted (x{check.ratio:.3g})"


def worst_ratio(checks: list[HeldOut]) -> Optional[float]:
    """The largest measured / predicted over the checks that have one (the most unsafe extrapolation).

    >>> worst_ratio([HeldOut("f", {}, "p", "r", "s", 10, 5, (), 10.0, 13, ""),
    ...              HeldOut("f", {}, "p", "r", "s", 10, 5, (), 10.0, 8, "")])
    1.3
    """
    ratios = [check.ratio for check in checks if check.ratio is not None and math.isfinite(check.ratio)]
    return max(ratios) if ratios else None
