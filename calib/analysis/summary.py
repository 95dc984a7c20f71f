"""The one-screen answer of a table: per class, size and projector, the k to use or "don't sketch".

What `calib tables` prints first and the report shows at its top. For one analysis (one tolerance)
of a safe-k table and the timings of :func:`calib.analysis.timing.timing_frame`, one line per cell
(family with its class parameters, size, projector, retrieval):

- ``k``: the class safe k (the default answer of the tables, ``lookup`` and the report), or None;
- ``k / m``: the share of the projected dimension m it keeps;
- ``speedup``: at that k, the median time of the original solved by its fastest configured method
  (the fair baseline) over the median end-to-end time of sketch + projected solve + retrieval,
  from the timings (None for point sets: there is no solve to save, and when not timed);
- ``verdict``: ``sketch`` when k < m and the reduction is faster end to end (or there is no solve
  to compare with), otherwise "don't sketch" with the reason: no tested k passes (reaches the
  target), k = m (the safe k is the projected dimension itself: no reduction), or slower (the
  reduced pipeline is slower than the original). When the class cannot be answered because the
  design has too few instances, it says so (the answer for the instances measured is in the
  detailed blocks below it).

Lines are sorted by class, then by size *numerically* (``rows=90`` before ``rows=150``), then by
projector. Pure functions of the table and the timings frame; :func:`summary_text` renders the
lines as fixed-width text of at most :data:`WIDTH` characters a line when the names allow it.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Optional

import pandas as pd

from calib.checks import is_real
from calib.keys import canonical_json
from calib.metrics import DEFAULT_RETRIEVALS

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, Predicate, SafeKTable

#: the widest line :func:`summary_text` aims for
WIDTH = 120
SKETCH = "sketch"
NO_K = "don't sketch: no k passes"
NO_REDUCTION = "don't sketch: k = m"
SLOWER = "don't sketch: slower"


def natural_key(text: str) -> tuple:
    """A sort key reading the numbers in ``text`` as numbers.

    >>> sorted(["rows=150,features=5", "rows=90,features=5"], key=natural_key)
    ['rows=90,features=5', 'rows=150,features=5']
    """
    return tuple((0, float(part), "") if part and part[0].isdigit() else (1, 0.0, part)
                 for part in re.split(r"(\d+(?:\.\d+)?)", text) if part)


def entry_order(entry: Entry, label: str = "") -> tuple:
    """Display order of table entries: family, class label, size numerically, projector, retrieval."""
    return (entry.family, label, natural_key(entry.size), entry.projector, entry.retrieval)


def _timing_index(timings: Optional[pd.DataFrame]) -> dict:
    if timings is None or timings.empty:
        return {}
    return {(row.family, row.params, row.projector, row.retrieval, int(row.k)): row
            for row in timings.itertuples(index=False)}


def _verdict(entry: Entry, k: Optional[int], speedup: Optional[float]) -> str:
    if k is None:
        klass = entry.class_
        if "already for the instances measured" not in klass.reason and klass.instances_needed > entry.instances:
            return f"no class answer ({entry.instances} of {klass.instances_needed} instances)"
        return NO_K
    if k >= entry.projected_dim:
        return NO_REDUCTION
    if speedup is not None and speedup <= 1.0:
        return SLOWER
    return SKETCH


def summary_lines(analysis: Analysis, timings: Optional[pd.DataFrame], label) -> list[dict]:
    """One dict per cell of ``analysis`` (module text); ``label(entry)`` names the class parameters."""
    times = _timing_index(timings)
    lines = []
    for entry in sorted(analysis.entries, key=lambda item: entry_order(item, label(item))):
        k, m = entry.class_.safe_k, entry.projected_dim
        row = times.get((entry.family, canonical_json(entry.params), entry.projector, entry.retrieval, k))
        solves = entry.kind != "points"
        speedup = None if (row is None or not solves or pd.isna(row.speedup)) else float(row.speedup)
        lines.append({"family": entry.family, "label": label(entry), "size": entry.size, "m": m,
                      "projector": entry.projector, "retrieval": entry.retrieval, "kind": entry.kind,
                      "instances": entry.instances, "k": k, "fraction": None if k is None else k / m,
                      "speedup": speedup,
                      "baseline_s": None if row is None or not solves else _float(row.baseline_median_s),
                      "reduced_s": None if row is None or not solves else _float(row.reduced_median_s),
                      "verdict": _verdict(entry, k, speedup)})
    return lines


def best_lines(lines: list[dict]) -> list[dict]:
    """One line per (class, size, projector): the retrieval with the smallest safe k (a k before none),
    ties to the kind's default retrieval (:data:`calib.metrics.DEFAULT_RETRIEVALS`), then by name.

    >>> pick = best_lines([{"family": "f", "label": "", "size": "s", "projector": "p", "kind": "lp", "k": k,
    ...                     "retrieval": name} for k, name in ((40, "basis-lstsq"), (40, "completion"), (None, "x"))])
    >>> [(line["retrieval"], line["k"]) for line in pick]
    [('completion', 40)]
    """
    best: dict = {}
    for line in lines:
        key = (line["family"], line["label"], line["size"], line["projector"])
        rank = (line["k"] is None, line["k"] or 0, line["retrieval"] != DEFAULT_RETRIEVALS.get(line["kind"]),
                line["retrieval"])
        if key not in best or rank < best[key][0]:
            best[key] = (rank, line)
    return [line for _, line in best.values()]


def _float(value) -> Optional[float]:
    return None if value is None or pd.isna(value) else float(value)


def time_text(line: dict) -> str:
    """The speed-up column: "18.9x" (below 1: slower than the original), "no solve" (point sets) or "–"."""
    if line["kind"] == "points":
        return "no solve"
    return "–" if line["speedup"] is None else f"{line['speedup']:.2g}x" if line["speedup"] < 1 else f"{line['speedup']:.3g}x"


def cells(line: dict) -> list[str]:
    """The text cells of one line: class, size, m, projector, safe k, k/m, time, verdict."""
    name = " ".join(filter(None, [line["family"], line["label"]]))
    return [name, line["size"], str(line["m"]), line["projector"], "none" if line["k"] is None else str(line["k"]),
            "–" if line["fraction"] is None else f"{line['fraction']:.2f}", time_text(line), line["verdict"]]


HEADER = ["class", "size", "m", "projector", "safe k", "k/m", "speed-up", "answer"]


#: words for the tolerances of a predicate (the report's and the summary's headings)
TOLERANCE_WORDS = {"gap": "projected optimum's gap", "obj": "objective error", "feas": "infeasibility",
                   "sign": "sign/cone violation", "distortion": "worst pairwise distortion"}


def predicate_text(record: Predicate) -> str:
    """The predicate in words: each tolerance it checks, and whether the verdict must match (no None, no dict)."""
    predicate = record.to_dict()
    checks = [f"{TOLERANCE_WORDS.get(key, key)} ≤ {value:g}" for key, value in sorted(predicate.items())
              if key in TOLERANCE_WORDS and is_real(value)]
    if predicate.get("classify"):
        checks.append("the feasibility verdict matches the original's")
    extras = [f"{key.replace('_', ' ')}" for key, value in sorted(predicate.items())
              if key not in TOLERANCE_WORDS and key not in ("name", "classify") and value is True]
    return f"{predicate['name']}: " + "; ".join(checks + extras) if checks or extras else predicate["name"]


def heading(table: SafeKTable, analysis: Analysis) -> list[str]:
    """What the summary answers: the predicate and tolerance, the target and scope, the time measure."""
    target = table.target
    tau = "" if analysis.tau is None else f" at tau = {analysis.tau:g}"
    return [f"The answer{tau} ({predicate_text(analysis.predicate)})",
            f"safe k: the smallest tested k with at least {target.success_rate:.0%} success at "
            f"{target.confidence:.0%} confidence for the class (instances are the unit); speed-up: the original "
            f"solved by its fastest method over sketch + projected solve + retrieval at that k (medians)"]


#: columns of the answer right-aligned as numbers
NUMERIC = {"m", "safe k", "k/m", "speed-up"}


def answer_table(lines: list[dict]) -> tuple[list[str], list[list[str]], Optional[str]]:
    """(header, text rows, retrieval) of the answer: the :func:`best_lines` of ``lines``, with a retrieval
    column when the cells' best retrievals differ; else that one retrieval (for the heading) and no column."""
    chosen = best_lines(lines)
    names = sorted({line["retrieval"] for line in chosen})
    if len(names) <= 1:
        return HEADER, [cells(line) for line in chosen], names[0] if names else None
    return (HEADER[:4] + ["retrieval"] + HEADER[4:], [cells(line)[:4] + [line["retrieval"]] + cells(line)[4:]
                                                      for line in chosen], None)


def retrieval_note(lines: list[dict], one: Optional[str]) -> Optional[str]:
    """A heading line naming the retrieval the answer is for, when the table holds several."""
    held = sorted({line["retrieval"] for line in lines})
    if len(held) <= 1:
        return None
    which = f"retrieval {one}" if one else "the retrieval named per line"
    return (f"{which}: of the table's retrievals ({', '.join(held)}), the one with the smallest safe k per cell "
            f"(ties to the kind's default)")


def summary_text(table: SafeKTable, analysis: Analysis, timings: Optional[pd.DataFrame], label) -> str:
    """The :func:`answer_table` of :func:`summary_lines` as a fixed-width block under :func:`heading` (wrapped)."""
    import textwrap

    lines = summary_lines(analysis, timings, label)
    header, body, one = answer_table(lines)
    rows = [header] + body
    widths = [max(len(row[column]) for row in rows) for column in range(len(header) - 1)]
    numeric = {column for column, name in enumerate(header) if name in NUMERIC}
    texts = heading(table, analysis) + [note for note in [retrieval_note(lines, one)] if note]
    out = [line for text in texts for line in textwrap.wrap(text, WIDTH, break_on_hyphens=False)]
    for row in rows:
        parts = [value.rjust(width) if column in numeric else value.ljust(width)
                 for column, (value, width) in enumerate(zip(row, widths))]
        out.append("  " + "  ".join(parts + [row[-1]]).rstrip())
    return "\n".join(out)
