"""The campaign store: one SQLite file per campaign, written only by the coordinating process.

WAL journal, one transaction per finished trial, trial rows append-only. Tables:

- ``campaign`` (key, value): name, spec fingerprint and text, root seed, schema version, store
  format.
- ``environments`` (env_id, versions): package versions of each process that produced rows.
- ``instances``: one row per instance with its size and the cached original solve.
- ``trials``: one row per (trial, retrieval) with identity, status, message, metrics (JSON),
  seconds, stream key, root seed, solver options and environment.

Re-opening with the same spec resumes; a different spec under the same campaign name is refused
unless a new campaign is asked for, which then lives beside it as ``<name>-2.sqlite``, ``-3``...

Store formats (``campaign.store_format``): 1 (no key) had no ``root_seed`` and ``solver_options``
trial columns; opening it for writing migrates it to 2 by adding them (old rows keep NULL there:
their root seed is the last element of ``stream_key``, their solver options the spec's).
"""

from __future__ import annotations

import io
import json
import sqlite3
import sys
from pathlib import Path
from typing import Iterable, Optional

import numpy as np

from calib import SCHEMA_VERSION, __version__
from calib.errors import InputError
from calib.keys import canonical_json, stable_id

_SCHEMA = """
CREATE TABLE IF NOT EXISTS campaign (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS environments (env_id TEXT PRIMARY KEY, versions TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS instances (
    instance_id TEXT PRIMARY KEY, family TEXT NOT NULL, params TEXT NOT NULL, idx INTEGER NOT NULL,
    kind TEXT NOT NULL, projected_dim INTEGER NOT NULL, n_points INTEGER NOT NULL,
    orig_status TEXT NOT NULL, orig_code INTEGER, orig_message TEXT, orig_objective REAL,
    orig_seconds REAL, orig_iterations INTEGER, solver_options TEXT, orig_x BLOB, build_seconds REAL
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
STORE_FORMAT = 2

#: columns added by each migration: format -> [(table, column, type)]
_MIGRATIONS = {2: [("trials", "root_seed", "INTEGER"), ("trials", "solver_options", "TEXT")]}


def environment() -> dict:
    """Versions of calib, Python and the numerical packages in this process."""
    import highspy
    import scipy
    import scs

    versions = {"calib": __version__, "schema": SCHEMA_VERSION, "python": sys.version.split()[0],
                "numpy": np.__version__, "scipy": scipy.__version__, "scs": scs.__version__}
    try:
        from importlib.metadata import version

        versions["highspy"] = version("highspy")
    except Exception:  # pragma: no cover - metadata missing in odd installs
        versions["highspy"] = getattr(highspy, "__version__", "unknown")
    return versions


def array_to_blob(x: Optional[np.ndarray]) -> Optional[bytes]:
    """``np.save`` bytes (no pickle)."""
    if x is None:
        return None
    buffer = io.BytesIO()
    np.save(buffer, np.asarray(x, dtype=float), allow_pickle=False)
    return buffer.getvalue()


def blob_to_array(blob: Optional[bytes]) -> Optional[np.ndarray]:
    if blob is None:
        return None
    return np.load(io.BytesIO(blob), allow_pickle=False)


class Store:
    """A campaign store on disk. Use :meth:`create_or_resume` to open one for a spec."""

    def __init__(self, path: Path, connection: sqlite3.Connection):
        self.path = path
        self.db = connection

    # ----- opening --------------------------------------------------------------------------
    @classmethod
    def open_existing(cls, path: str | Path) -> "Store":
        """Open a store for reading; raises :class:`InputError` when it is not a calib store."""
        path = Path(path)
        if not path.is_file():
            raise InputError(str(path), "no such store", "give the .sqlite file that `calib run` printed")
        try:
            connection = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
            connection.execute("SELECT value FROM campaign WHERE key = 'name'").fetchone()
        except sqlite3.DatabaseError:
            raise InputError(str(path), "not a calib store (unreadable SQLite or missing tables)", "point at a .sqlite file written by `calib run`") from None
        return cls(path, connection)

    @classmethod
    def create_or_resume(cls, spec, out_dir: str | Path, new_campaign: bool = False) -> "Store":
        """The store of ``spec`` under ``out_dir``, created or resumed (see :func:`locate`)."""
        path, _ = locate(spec, out_dir, new_campaign)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as error:
            raise InputError(str(path.parent), f"cannot create the output folder: {error.strerror}", "choose a writable --out folder") from None
        try:
            connection = sqlite3.connect(path, isolation_level=None)
            connection.execute("PRAGMA journal_mode=WAL")
            connection.execute("PRAGMA synchronous=NORMAL")
            connection.executescript(_SCHEMA)
        except sqlite3.DatabaseError as error:
            raise InputError(str(path), f"cannot open the store: {error}", "check the file is a calib store and the folder is writable") from None
        store = cls(path, connection)
        store._migrate()
        store._claim(spec)
        return store

    def _migrate(self) -> None:
        meta = dict(self.db.execute("SELECT key, value FROM campaign").fetchall())
        if not meta:
            return
        found = int(meta.get("store_format", 1))
        if found > STORE_FORMAT:
            raise InputError(str(self.path), f"written by a newer calib (store format {found}, this one reads {STORE_FORMAT})",
                             "upgrade calib to resume this campaign")
        with self.transaction():
            for version in range(found + 1, STORE_FORMAT + 1):
                for table, column, kind in _MIGRATIONS[version]:
                    columns = {row[1] for row in self.db.execute(f"PRAGMA table_info({table})")}
                    if column not in columns:
                        self.db.execute(f"ALTER TABLE {table} ADD COLUMN {column} {kind}")
            self.db.execute("INSERT OR REPLACE INTO campaign (key, value) VALUES ('store_format', ?)", (str(STORE_FORMAT),))

    def _claim(self, spec) -> None:
        existing = dict(self.db.execute("SELECT key, value FROM campaign").fetchall())
        if existing:
            if existing.get("fingerprint") != spec.fingerprint:  # locate() only picks matching stores
                raise InputError(str(self.path), f"campaign {spec.name!r} already exists with a different spec",
                                 "pass --new-campaign, rename the campaign, or restore the original spec to resume")
            return
        values = {"name": self.path.stem, "spec_name": spec.name, "fingerprint": spec.fingerprint,
                  "spec": canonical_json(spec.raw), "root_seed": str(spec.root_seed),
                  "schema_version": str(SCHEMA_VERSION), "store_format": str(STORE_FORMAT),
                  "plugins": ",".join(spec.plugins)}
        with self.transaction():
            self.db.executemany("INSERT INTO campaign (key, value) VALUES (?, ?)", sorted(values.items()))

    # ----- writing --------------------------------------------------------------------------
    def transaction(self):
        return _Transaction(self.db)

    def register_environment(self, versions: dict) -> str:
        env_id = stable_id(versions)
        with self.transaction():
            self.db.execute("INSERT OR IGNORE INTO environments (env_id, versions) VALUES (?, ?)", (env_id, canonical_json(versions)))
        return env_id

    def add_instance(self, row: dict) -> None:
        row = {**row, "orig_x": array_to_blob(row.get("orig_x"))}
        columns = ", ".join(row)
        with self.transaction():
            self.db.execute(f"INSERT OR REPLACE INTO instances ({columns}) VALUES ({', '.join('?' * len(row))})", tuple(row.values()))

    def add_trial_rows(self, rows: Iterable[dict]) -> None:
        """Append the rows of one trial in one transaction (all or nothing)."""
        rows = list(rows)
        if not rows:
            return
        columns = list(rows[0])
        sql = f"INSERT INTO trials ({', '.join(columns)}) VALUES ({', '.join('?' * len(columns))})"
        with self.transaction():
            self.db.executemany(sql, [tuple(row[c] for c in columns) for row in rows])

    # ----- reading --------------------------------------------------------------------------
    def meta(self) -> dict:
        return dict(self.db.execute("SELECT key, value FROM campaign").fetchall())

    def done_trial_ids(self) -> set[str]:
        return {row[0] for row in self.db.execute("SELECT DISTINCT trial_id FROM trials")}

    def instance_row(self, instance_id: str) -> Optional[dict]:
        cursor = self.db.execute("SELECT * FROM instances WHERE instance_id = ?", (instance_id,))
        row = cursor.fetchone()
        if row is None:
            return None
        record = dict(zip([d[0] for d in cursor.description], row))
        record["orig_x"] = blob_to_array(record["orig_x"])
        return record

    def trial_records(self, trial_id: str) -> list[dict]:
        """The stored rows of one trial (one per retrieval), oldest first."""
        cursor = self.db.execute("SELECT * FROM trials WHERE trial_id = ? ORDER BY rowid", (trial_id,))
        names = [d[0] for d in cursor.description]
        return [dict(zip(names, row)) for row in cursor.fetchall()]

    def matching_trial_ids(self, prefix: str, limit: int = 5) -> list[str]:
        """Stored trial ids starting with ``prefix`` (at most ``limit``)."""
        rows = self.db.execute("SELECT DISTINCT trial_id FROM trials WHERE trial_id >= ? AND trial_id < ? LIMIT ?",
                               (prefix, prefix + "\uffff", limit))
        return [row[0] for row in rows]

    def environment_versions(self, env_id: str) -> dict:
        row = self.db.execute("SELECT versions FROM environments WHERE env_id = ?", (env_id,)).fetchone()
        return json.loads(row[0]) if row else {}

    def trial_count(self) -> int:
        return self.db.execute("SELECT COUNT(DISTINCT trial_id) FROM trials").fetchone()[0]

    def close(self) -> None:
        self.db.close()


def store_path(out_dir: str | Path, name: str, number: int) -> Path:
    """``<out>/<name>.sqlite`` for the first campaign of that name, ``<out>/<name>-<number>.sqlite`` after."""
    return Path(out_dir) / (f"{name}.sqlite" if number == 1 else f"{name}-{number}.sqlite")


def stored_fingerprint(path: Path) -> Optional[str]:
    """The spec fingerprint of an existing store (None for an empty file)."""
    try:
        connection = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        try:
            tables = {row[0] for row in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
            if "campaign" not in tables:
                return None
            row = connection.execute("SELECT value FROM campaign WHERE key = 'fingerprint'").fetchone()
        finally:
            connection.close()
    except sqlite3.DatabaseError:
        raise InputError(str(path), "not a calib store (unreadable SQLite)", "move the file away or choose another --out folder") from None
    return row[0] if row else None


def locate(spec, out_dir: str | Path, new_campaign: bool = False) -> tuple[Path, bool]:
    """Where the store of ``spec`` lives and whether it exists already.

    The store holding the same spec (``<name>.sqlite``, ``<name>-2.sqlite``, ...) is resumed. When
    none does and ``<name>.sqlite`` holds another spec, this refuses unless ``new_campaign`` asks
    for the next free ``<name>-N.sqlite``.
    """
    number = 1
    while True:
        path = store_path(out_dir, spec.name, number)
        if not path.exists():
            break
        if stored_fingerprint(path) in (spec.fingerprint, None):
            return path, True
        number += 1
    if number > 1 and not new_campaign:
        first = store_path(out_dir, spec.name, 1)
        raise InputError(str(first), f"campaign {spec.name!r} already exists there with a different spec",
                         f"pass --new-campaign to start {path.name} beside it, rename the campaign, or restore the original spec to resume")
    return path, False


class _Transaction:
    def __init__(self, db: sqlite3.Connection):
        self.db = db

    def __enter__(self):
        self.db.execute("BEGIN IMMEDIATE")
        return self.db

    def __exit__(self, kind, value, traceback):
        self.db.execute("COMMIT" if kind is None else "ROLLBACK")
        return False


def json_or_none(value) -> Optional[str]:
    return None if value is None else json.dumps(value, sort_keys=True, allow_nan=False)
