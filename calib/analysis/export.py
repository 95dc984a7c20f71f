"""Tidy export of a store: one row per (trial, retrieval), metrics expanded into columns.

Builds on :func:`calib.analysis.rows.load_rows` (the same frame the safe-k tables are computed
from) and adds ``env_versions``, the package versions (JSON text) of the environment that produced
each row (:func:`calib.store.reading.environment_versions`). Written as CSV (``\\n`` line ends, no
index) or Parquet (pyarrow), each file whole or not at all (:func:`calib.outputs.write_file`).
Costs: O(rows x columns).
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Optional

import pandas as pd

from calib.analysis.rows import load_rows
from calib.errors import InputError
from calib.store.database import Store
from calib.store.reading import environment_versions


def export_frame(store: Store) -> pd.DataFrame:
    """The rows of ``store`` in trial-id order, with an ``env_versions`` JSON column."""
    rows = load_rows(store)
    versions = environment_versions(store.db)
    rows["env_versions"] = rows["env_id"].map(versions)
    return rows


def write_export(frame: pd.DataFrame, csv_path: Optional[Path] = None, parquet_path: Optional[Path] = None) -> None:
    """Write CSV (``\\n`` line ends, no index) and/or Parquet (pyarrow), each whole or not at all."""
    from calib.outputs import write_file

    if parquet_path is not None:
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            raise InputError("--parquet", "pyarrow is not installed", "install it with `pip install 'calib[parquet]'` or use --csv") from None
    if csv_path is not None:
        write_file(csv_path, frame.to_csv(index=False, lineterminator="\n"), "--csv")
    if parquet_path is not None:
        buffer = io.BytesIO()
        frame.to_parquet(buffer, index=False)
        write_file(parquet_path, buffer.getvalue(), "--parquet")
