"""The store's SQLite schema, its format history and the migrations between formats.

Tables (:data:`TABLES`):

- ``campaign`` (key, value): name, spec fingerprint and text, root seed, schema version, store
  format, plugins, ``grown_from``.
- ``environments`` (env_id, versions): package versions of each process that produced rows
  (:mod:`calib.store.environment`).
- ``instances``: one row per instance with its size, the cached original solve (the reference
  method's), its fair baseline: ``baseline_method``, ``baseline_seconds`` and ``methods`` (JSON:
  every configured method's status, solver code and message, value, seconds, iterations, options;
  see :mod:`calib.solvers.methods`), and its ``features`` (JSON, :mod:`calib.features`).
- ``trials``: one row per (trial, retrieval) with identity, status, message, metrics (JSON),
  seconds, stream key, root seed, solver options and environment.

Store formats (``campaign.store_format``, :data:`STORE_FORMAT` written now): 1 (no key) had no
``root_seed`` and ``solver_options`` trial columns; 2 adds them (old rows keep NULL there: their
root seed is the last element of ``stream_key``, their solver options the spec's). Format 2 had no
fair baseline; 3 adds the instance columns ``baseline_method``, ``baseline_seconds`` and
``methods`` (old rows keep NULL: their baseline is their original solve time). Format 4 adds the
instance column ``features`` (old instances keep NULL: their table entries carry no features).
Format 5 writes solver statuses in calib's own words (``no_finite_optimum``, ``unverified``,
``stopped_on_time``, ``stopped_on_iterations``, ``solver_failed``;
:data:`calib.solvers.result.FORMER_STATUSES`): :func:`rename_statuses` rewrites the instance rows,
the method records and the trial metrics, and reading an older store without migrating it maps the
former words (:func:`calib.analysis.rows.load_rows`). Opening a store for writing applies
:data:`_MIGRATIONS` (columns) and :data:`_REWRITES` (data) format by format, in one transaction.

Column encodings: arrays as ``np.save`` bytes without pickle (:func:`array_to_blob`), JSON with
sorted keys (:func:`json_or_none`). Costs: a migration is O(rows) for format 5, else O(1).
"""

from __future__ import annotations

import io
import json
import sqlite3
from typing import Optional

import numpy as np


_SCHEMA = """
CREATE TABLE IF NOT EXISTS campaign (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS environments (env_id TEXT PRIMARY KEY, versions TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS instances (
    instance_id TEXT PRIMARY KEY, family TEXT NOT NULL, params TEXT NOT NULL, idx INTEGER NOT NULL,
    kind TEXT NOT NULL, projected_dim INTEGER NOT NULL, n_points INTEGER NOT NULL,
    orig_status TEXT NOT NULL, orig_code INTEGER, orig_message TEXT, orig_objective REAL,
    orig_seconds REAL, orig_iterations INTEGER, solver_options TEXT, orig_x BLOB, build_seconds REAL,
    baseline_method TEXT, baseline_seconds REAL, methods TEXT, features TEXT
);
CREATE TABLE IF NOT EXISTS trials (
    trial_id TEXT NOT NULL, retrieval TEXT NOT NULL, instance_id TEXT NOT NULL,
    projector TEXT NOT NULL, projector_options TEXT NOT NULL, k INTEGER NOT NULL, k_label TEXT,
    replicate INTEGER NOT NULL, status TEXT NOT NULL, message TEXT, metrics TEXT,
    seconds REAL, stream_key TEXT NOT NULL, env_id TEXT NOT NULL, root_seed INTEGER, solver_options TEXT,
    PRIMARY KEY (trial_id, retrieval)
);
"""


#: the layout written by this code (see the module docstring for the history)
STORE_FORMAT = 5


#: columns added by each migration: format -> [(table, column, type)]
_MIGRATIONS = {2: [("trials", "root_seed", "INTEGER"), ("trials", "solver_options", "TEXT")],
               3: [("instances", "baseline_method", "TEXT"), ("instances", "baseline_seconds", "REAL"),
                   ("instances", "methods", "TEXT")],
               4: [("instances", "features", "TEXT")],
               5: []}


def rename_statuses(db: sqlite3.Connection) -> None:
    """Format 5: solver statuses in calib's own words (:data:`calib.solvers.result.FORMER_STATUSES`), in the
    instance rows, each configured method's record and the trial metrics (trial statuses are not solver words)."""
    from calib.solvers.result import FORMER_STATUSES

    for old, new in FORMER_STATUSES.items():
        db.execute("UPDATE instances SET orig_status = ? WHERE orig_status = ?", (new, old))
        for key in ("orig_status", "proj_status"):
            db.execute(f"UPDATE trials SET metrics = json_set(metrics, '$.{key}', ?) "
                       f"WHERE json_valid(metrics) AND json_extract(metrics, '$.{key}') = ?", (new, old))
    for instance_id, text in db.execute("SELECT instance_id, methods FROM instances WHERE methods IS NOT NULL").fetchall():
        methods = json.loads(text)
        for record in methods.values():
            record["status"] = FORMER_STATUSES.get(record.get("status"), record.get("status"))
        db.execute("UPDATE instances SET methods = ? WHERE instance_id = ?", (json.dumps(methods, sort_keys=True), instance_id))


#: data rewrites of a format, run after its columns are added: format -> function(connection)
_REWRITES = {5: rename_statuses}


#: the tables every calib store has
TABLES = ("campaign", "environments", "instances", "trials")


def array_to_blob(x: Optional[np.ndarray]) -> Optional[bytes]:
    """``np.save`` bytes (no pickle)."""
    if x is None:
        return None
    buffer = io.BytesIO()
    np.save(buffer, np.asarray(x, dtype=float), allow_pickle=False)
    return buffer.getvalue()


def blob_to_array(blob: Optional[bytes]) -> Optional[np.ndarray]:
    """The array :func:`array_to_blob` stored (None stays None)."""
    if blob is None:
        return None
    return np.load(io.BytesIO(blob), allow_pickle=False)


def json_or_none(value) -> Optional[str]:
    """A JSON column value: sorted keys, no NaN (SQLite and JSON have none); None stays NULL."""
    return None if value is None else json.dumps(value, sort_keys=True, allow_nan=False)
