"""Times against the fair baseline: the original's fastest method against sketch + projected solve
+ retrieval, per cell and k.

Per (family, size, projector, retrieval, k): the median baseline time over the cell's instances
(each original is solved once per configured method and the fastest reaching the verdict is the
baseline, :mod:`calib.solvers.methods`), the medians of the sketch time (draw T and apply it), the
projected solve time and the retrieval time (with any extra solves) over the trials, the median
end-to-end time t_total per trial, the speed-up = median baseline / median end to end (below 1:
the reduction cost time), and the share of trials faster than their baseline. Rows of the safe k
(from a table analysis) are marked, so the speed-up at the safe k can be read off.

Timings differ between two runs of the same campaign, so they are kept out of the safe-k table
(which must be byte-identical for equal measurements) and written to their own file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from calib.analysis.tables import CELL_KEYS, num
from calib.keys import canonical_json

COLUMNS = ["baseline_median_s", "sketch_median_s", "solve_median_s", "retrieve_median_s", "reduced_median_s", "speedup",
           "faster_share"]


def _cell_timings(cell: pd.DataFrame) -> pd.Series:
    ok = cell[cell["status"].eq("ok")]
    parts = ok[["t_sketch", "t_solve_proj", "t_retrieve", "t_total", "t_baseline"]].apply(pd.to_numeric, errors="coerce")
    baseline = parts.loc[~ok["instance_id"].duplicated(), "t_baseline"].median() if not ok.empty else np.nan  # one per instance
    reduced = parts["t_total"].median() if not ok.empty else np.nan
    speedup = baseline / reduced if reduced and np.isfinite(reduced) and reduced > 0 else np.nan
    faster = float(parts["t_total"].lt(parts["t_baseline"]).mean()) if not ok.empty else np.nan
    values = [baseline, parts["t_sketch"].median(), parts["t_solve_proj"].median(), parts["t_retrieve"].median(), reduced,
              speedup, faster]
    return pd.Series([num(value, 4) for value in values], index=COLUMNS)


def timing_frame(rows: pd.DataFrame, analysis: dict) -> pd.DataFrame:
    """Per (cell, k) medians and speed-up, with the safe k of ``analysis`` marked (``at_safe_k``)."""
    frame = rows.groupby(CELL_KEYS + ["k"], sort=True).apply(_cell_timings, include_groups=False).reset_index()
    safe = {(entry["family"], canonical_json(entry["params"]), entry["projector"], entry["retrieval"]): entry["safe_k"]
            for entry in analysis["entries"]}
    frame["safe_k"] = [safe.get((row.family, row.params, row.projector, row.retrieval)) for row in frame.itertuples()]
    frame["at_safe_k"] = frame["safe_k"].eq(frame["k"])
    frame["safe_k"] = frame["safe_k"].astype("Int64")
    return frame


def speedup_at_safe_k(timings: pd.DataFrame) -> pd.DataFrame:
    """One line per cell that has a safe k: its speed-up there."""
    return timings[timings["at_safe_k"]][["family", "size", "params", "projector", "retrieval", "k", "reduced_median_s",
                                         "baseline_median_s", "speedup", "faster_share"]].reset_index(drop=True)


def nothing_saved(timings: pd.DataFrame) -> bool:
    """True when no (cell, k) has a median end-to-end time below its median baseline."""
    return not bool(pd.to_numeric(timings["speedup"], errors="coerce").gt(1.0).any())


def write_timings(timings: pd.DataFrame, path: str | Path) -> None:
    """CSV of :func:`timing_frame` (written whole or not at all)."""
    from calib.outputs import write_file

    write_file(path, timings.to_csv(index=False, lineterminator="\n"), "--timings")
