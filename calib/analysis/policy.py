"""The policy answer of a cell: which k a reduction policy should use, or that no k saves time.

A team setting a reduction policy asks two things at a given k: is the answer usable, and did the
reduction save time? Per cell (family, size, projector, retrieval) and swept k this module counts
the *policy successes*: trials that succeed under the table's predicate **and** are faster end to
end than the fair baseline (:func:`calib.verdicts.success.saves_time`: sketch + projected solve +
retrieval, repairs and warm solves included, against the original solved by its fastest
configured method). A k *meets the target* when the one-sided Clopper–Pearson lower bound of that
count reaches the target rate 1 - delta (C. J. Clopper and E. S. Pearson, Biometrika 26:404–413,
1934), the rule of the safe k.

The **policy k** is, among the k that meet the target, the one with the smallest median
end-to-end time t_total (ties: the smaller k). When no k meets it the answer is explicit:
:data:`NO_SAVING`. Unlike the safe k it needs no monotonicity across k: a policy picks one k, and
any k that meets the target is a valid choice; the fastest is the useful one.

The answer rests on measured wall times, which vary between runs and machines: a table carries it
only when asked (``calib tables --policy``, the ``policy`` preset, ``--faster``), and it is evidence
about these instances on this machine, not a proof.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from calib.verdicts.stats import clopper_pearson_lower
from calib.verdicts.success import OPTIMIZATION_KINDS, Predicate, evaluate

if TYPE_CHECKING:  # annotations only
    from calib.analysis.records import Entry
    from calib.verdicts.saferule import Confidence

#: the answer of a cell where no swept k is usable and faster often enough
NO_SAVING = "no k saves time at this size"
_DIGITS = 4


def row_columns(rows: pd.DataFrame, predicate: Predicate) -> pd.DataFrame:
    """Per row: ``policy_success`` (the predicate with the cost condition, so an exact retrieval counts
    when it saves time) and the numeric times."""
    success = evaluate(rows, replace(predicate, faster=True))
    return pd.DataFrame({"policy_success": success.astype(int),
                         "t_total_s": pd.to_numeric(rows["t_total"], errors="coerce"),
                         "t_baseline_s": pd.to_numeric(rows["t_baseline"], errors="coerce")}, index=rows.index)


def aggregations() -> dict:
    """Named aggregations for ``groupby(...).agg`` over rows carrying :func:`row_columns`."""
    return {"policy_successes": ("policy_success", "sum"), "time_median": ("t_total_s", "median"),
            "baseline_median": ("t_baseline_s", "median")}


def _num(value):
    return None if value is None or not np.isfinite(value) else float(f"{float(value):.{_DIGITS}g}")


def policy_k(ks: ArrayLike, passes: ArrayLike, times: ArrayLike) -> tuple[int | None, int | None]:
    """(policy k or None, its position) on a grid: the smallest median time among passing k.

    ``ks`` (projected dimensions), ``passes`` (the policy bound reaches the target) and ``times``
    (median end-to-end seconds; NaN: not measured, never chosen) have shape (K,). Ties go to the
    smaller k.

    >>> policy_k([10, 20, 40], [False, True, True], [0.5, 0.3, 0.4])
    (20, 1)
    >>> policy_k([10, 20], [False, False], [0.5, 0.3])
    (None, None)
    """
    candidates = [(float(time), int(k), index) for index, (k, ok, time) in enumerate(zip(ks, passes, times))
                  if ok and np.isfinite(time)]
    if not candidates:
        return None, None
    _, k, index = min(candidates)
    return k, index


def entry_block(cell: pd.DataFrame, confidence: Confidence) -> dict:
    """``{"policy": ...}`` for the rows of one cell carrying :func:`row_columns`, else ``{}``.

    ``cell`` has one row per trial; the block's times are seconds (medians), its grid one item per
    swept k with the one-sided Clopper–Pearson bound of the policy successes at ``confidence.level``.
    """
    if "policy_success" not in cell or cell["kind"].iloc[0] not in OPTIMIZATION_KINDS:
        return {}
    per_k = cell.groupby("k", sort=True).agg(trials=("policy_success", "size"), **aggregations())
    ks = per_k.index.tolist()
    successes, trials = per_k["policy_successes"].to_numpy(), per_k["trials"].to_numpy()
    lower = np.atleast_1d(clopper_pearson_lower(successes, trials, confidence.level))
    passes = lower >= confidence.target
    times, baselines = per_k["time_median"].to_numpy(float), per_k["baseline_median"].to_numpy(float)
    k, index = policy_k(ks, passes, times)
    grid = [{"k": int(each), "successes": int(count), "lower_bound": _num(bound), "passes": bool(ok),
             "time_median_s": _num(time), "baseline_median_s": _num(base)}
            for each, count, bound, ok, time, base in zip(ks, successes, lower, passes, times, baselines)]
    block = {"k": k, "answer": NO_SAVING, "time_median_s": None,
             "baseline_median_s": _num(np.nanmedian(baselines)) if np.isfinite(baselines).any() else None,
             "speedup": None, "grid": grid}
    if k is not None:
        time, base = times[index], baselines[index]
        block.update(time_median_s=_num(time), baseline_median_s=_num(base), speedup=_num(base / time) if time > 0 else None,
                     answer=f"k = {k}: usable and faster in enough trials; median end to end {time:.3g} s "
                            f"against the baseline's {base:.3g} s")
    return {"policy": block}


def policy_text(entry: "Entry") -> str:
    """One line for text views (tables): the policy k of a :class:`calib.analysis.records.Entry`, or the
    explicit no-saving answer."""
    block = entry.policy
    if not block:
        return "policy k: not computed (ask with --policy)"
    if block.k is None:
        return f"policy k: none, {NO_SAVING}"
    return f"policy k = {block.k} (median {block.time_median_s:.3g} s end to end against the baseline's " \
           f"{block.baseline_median_s:.3g} s, speed-up {block.speedup:.3g}x)"
