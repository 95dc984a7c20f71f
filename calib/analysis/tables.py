"""Safe-k tables: from the raw store to per-(family, size, projector, retrieval) safe k.

For each cell and each swept k: trials, successes, success rate and the one-sided
Clopper–Pearson lower bound at the chosen confidence. The safe k of a cell is the smallest swept
k whose lower bound reaches the target rate 1 - delta while every larger swept k does too (a
monotone rule: a lucky small k below a failing larger one is not trusted); when there is none,
safe k is null and ``safe_k_reason`` says why.

These are empirical statements about the instances measured, not proofs.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

import numpy as np
import pandas as pd

from calib import SCHEMA_VERSION, __version__
from calib.analysis.stats import clopper_pearson_lower
from calib.analysis.success import Predicate, evaluate
from calib.errors import InputError
from calib.metrics import FIELDS
from calib.sweep.store import Store

TABLE_FORMAT = "calib.safe-k"
TABLE_VERSION = 1
CELL_KEYS = ["family", "size", "params", "projector", "retrieval"]


@dataclass(frozen=True)
class Confidence:
    """Target success rate 1 - delta, claimed at the given confidence level."""

    delta: float = 0.1
    level: float = 0.95

    def __post_init__(self) -> None:
        if not 0.0 < self.delta < 1.0:
            raise InputError("--delta", f"must lie in (0, 1), got {self.delta!r}", "e.g. 0.1 for a 90% success target")
        if not 0.0 < self.level < 1.0:
            raise InputError("--confidence", f"must lie in (0, 1), got {self.level!r}", "e.g. 0.95")


def _size_label(family: str, params: dict) -> str:
    from calib.families import REGISTRY

    keys = REGISTRY[family].size_keys if family in REGISTRY else tuple(sorted(params))
    return ",".join(f"{key}={params[key]}" for key in keys)


def load_rows(store: Store) -> pd.DataFrame:
    """Tidy table: one row per (trial, retrieval) with instance columns and every metric field."""
    db = store.db
    trials = pd.read_sql_query("SELECT * FROM trials ORDER BY trial_id, retrieval", db)
    instances = pd.read_sql_query(
        "SELECT instance_id, family, params, idx, kind, projected_dim, n_points, orig_seconds FROM instances", db)
    rows = trials.merge(instances, on="instance_id", how="left", validate="many_to_one")
    metrics = [json.loads(text) if isinstance(text, str) else {} for text in rows["metrics"]]
    expanded = pd.DataFrame.from_records([{name: record.get(name) for name in FIELDS} for record in metrics], index=rows.index)
    rows = pd.concat([rows.drop(columns=["metrics"]), expanded], axis=1)
    rows["size"] = [_size_label(family, json.loads(params)) for family, params in zip(rows["family"], rows["params"])]
    return rows


def summarise(rows: pd.DataFrame, predicate: Predicate, confidence: Confidence) -> pd.DataFrame:
    """Per (cell, k): trials, successes, rate, lower bound, and the cell's safe k."""
    if rows.empty:
        raise InputError("store", "has no trial rows yet", "run `calib run SPEC` first")
    rows = rows.assign(success=evaluate(rows, predicate).astype(int))
    grouped = rows.groupby(CELL_KEYS + ["k"], sort=True).agg(
        trials=("success", "size"), successes=("success", "sum"), projected_dim=("projected_dim", "first"),
        n_points=("n_points", "first"), k_label=("k_label", "first"), errors=("status", lambda s: int((s != "ok").sum())),
    ).reset_index()
    grouped["rate"] = grouped["successes"] / grouped["trials"]
    grouped["lower_bound"] = clopper_pearson_lower(grouped["successes"], grouped["trials"], confidence.level)
    grouped["passes"] = grouped["lower_bound"] >= 1.0 - confidence.delta
    safe = grouped.groupby(CELL_KEYS, sort=True).apply(_safe_k, include_groups=False)
    return grouped.merge(safe, left_on=CELL_KEYS, right_index=True)


def _safe_k(cell: pd.DataFrame) -> pd.Series:
    cell = cell.sort_values("k")
    passes = cell["passes"].to_numpy()
    ks = cell["k"].to_numpy()
    if not passes[-1]:
        reason = "no swept k reaches the target" if not passes.any() else "the largest swept k misses the target"
        return pd.Series({"safe_k": None, "safe_k_reason": reason}, dtype=object)
    failing = np.flatnonzero(~passes)
    first = failing[-1] + 1 if failing.size else 0
    reason = "all swept k pass: the safe k may be smaller than the grid shows" if first == 0 else ""
    return pd.Series({"safe_k": int(ks[first]), "safe_k_reason": reason}, dtype=object)


def build_table(store: Store, predicate: Predicate, confidence: Confidence) -> dict:
    """The JSON-ready safe-k table of a store."""
    summary = summarise(load_rows(store), predicate, confidence)
    meta = store.meta()
    entries = []
    for key, cell in summary.groupby(CELL_KEYS, sort=True):
        cell = cell.sort_values("k")
        first = cell.iloc[0]
        safe_k = first["safe_k"]
        safe_k = None if safe_k is None or pd.isna(safe_k) else int(safe_k)
        entries.append({
            "family": key[0], "size": key[1], "params": json.loads(key[2]), "projector": key[3], "retrieval": key[4],
            "projected_dim": int(first["projected_dim"]), "n_points": int(first["n_points"]),
            "safe_k": safe_k, "safe_fraction": None if safe_k is None else round(safe_k / int(first["projected_dim"]), 6),
            "safe_k_reason": first["safe_k_reason"],
            "grid": [{"k": int(row.k), "k_source": row.k_label or "", "trials": int(row.trials), "successes": int(row.successes),
                      "errors": int(row.errors), "rate": round(float(row.rate), 6),
                      "lower_bound": round(float(row.lower_bound), 6), "passes": bool(row.passes)}
                     for row in cell.itertuples()],
        })
    return {
        "format": TABLE_FORMAT, "format_version": TABLE_VERSION,
        "campaign": {"name": meta.get("name"), "spec_fingerprint": meta.get("fingerprint"),
                     "root_seed": int(meta.get("root_seed", 0)), "store_schema": int(meta.get("schema_version", SCHEMA_VERSION))},
        "code_version": __version__,
        "predicate": predicate.as_dict(),
        "target": {"success_rate": round(1.0 - confidence.delta, 12), "confidence": confidence.level,
                   "bound": "one-sided Clopper-Pearson lower bound"},
        "notice": "Empirical evidence on the instances measured, not a proof: check a reduction policy on your own instances before relying on it.",
        "entries": entries,
    }


def table_to_frame(table: dict) -> pd.DataFrame:
    """Flat CSV view: one line per (cell, k) with the cell's safe k repeated."""
    lines = []
    for entry in table["entries"]:
        base = {key: entry[key] for key in ("family", "size", "projector", "retrieval", "projected_dim", "n_points", "safe_k", "safe_fraction", "safe_k_reason")}
        for point in entry["grid"]:
            lines.append({**base, **point})
    frame = pd.DataFrame(lines)
    frame["safe_k"] = frame["safe_k"].astype("Int64")
    return frame


def write_table(table: dict, json_path: Optional[Path] = None, csv_path: Optional[Path] = None) -> None:
    """Write the table as JSON (sorted keys, stable bytes) and/or CSV."""
    for path in (json_path, csv_path):
        if path is not None:
            Path(path).parent.mkdir(parents=True, exist_ok=True)
    if json_path is not None:
        Path(json_path).write_text(json.dumps(table, indent=2, sort_keys=True) + "\n", encoding="utf-8")
    if csv_path is not None:
        table_to_frame(table).to_csv(csv_path, index=False, lineterminator="\n")
