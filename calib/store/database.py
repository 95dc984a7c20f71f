"""The campaign store: one SQLite file per campaign, written only by the coordinating process.

:class:`Store` opens a store for reading (:meth:`Store.open_existing`) or for a spec
(:meth:`Store.create_or_resume`: the file :func:`calib.store.resume.locate` picks, locked, migrated
to :data:`calib.store.schema.STORE_FORMAT` and claimed for the spec, growing it when the spec
allows), then writes environments, instances and trials and reads them back. WAL journal, one
transaction per finished trial (all of its retrieval rows or none), trial rows append-only. The
tables and formats are :mod:`calib.store.schema`, the file mechanics :mod:`calib.store.sqlite`.
Costs: O(rows written or read) per call.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path
from typing import Iterable, Optional

from calib import SCHEMA_VERSION
from calib.errors import InputError
from calib.keys import canonical_json, stable_id
from calib.store.reading import campaign_settings, stored_spec_of
from calib.store.resume import REFUSAL_FIX, growth_problem, locate, refusal
from calib.store.schema import _MIGRATIONS, _REWRITES, _SCHEMA, STORE_FORMAT, array_to_blob, blob_to_array
from calib.store.sqlite import DAMAGED_FIX, StoreWriteError, Transaction, lock, open_checked, unlock


class Store:
    """A campaign store on disk. Use :meth:`create_or_resume` to open one for a spec."""

    def __init__(self, path: Path, connection: sqlite3.Connection, lock_fd: Optional[int] = None):
        self.path = path
        self.db = connection
        self._lock_fd = lock_fd

    # ----- opening --------------------------------------------------------------------------
    @classmethod
    def open_existing(cls, path: str | Path) -> "Store":
        """Open a store for reading; raises :class:`InputError` when it is not a calib store."""
        path = Path(path)
        return cls(path, open_checked(path))

    @classmethod
    def create_or_resume(cls, spec, out_dir: str | Path, new_campaign: bool = False) -> "Store":
        """The store of ``spec`` under ``out_dir``, created or resumed (see :func:`locate`)."""
        path, _ = locate(spec, out_dir, new_campaign)
        if path.parent.exists() and not path.parent.is_dir():
            raise InputError(f"--out {path.parent}", "is a file, not a folder", "choose a folder for the campaign stores")
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as error:
            raise InputError(f"--out {path.parent}", f"cannot create the output folder: {error.strerror}", "choose a writable --out folder") from None
        lock_fd = lock(path)
        try:
            store = cls(path, sqlite3.connect(path, isolation_level=None), lock_fd)
        except sqlite3.DatabaseError as error:
            unlock(lock_fd)
            raise StoreWriteError(path, error) from None
        try:
            store._prepare(spec)
        except BaseException:
            store.close()
            raise
        return store

    def _prepare(self, spec) -> None:
        """WAL mode, the tables, migration and the claim for ``spec``; SQLite errors become StoreWriteError."""
        try:
            self.db.execute("PRAGMA journal_mode=WAL")
            self.db.execute("PRAGMA synchronous=NORMAL")
            self.db.executescript(_SCHEMA)
            self._migrate()
            self._claim(spec)
        except sqlite3.DatabaseError as error:
            raise StoreWriteError(self.path, error) from None

    def _migrate(self) -> None:
        if not self.meta():
            return
        found = self.meta_int("store_format", 1)
        if found > STORE_FORMAT:
            raise InputError(str(self.path), f"written by a newer calib (store format {found}, this one reads {STORE_FORMAT})",
                             "upgrade calib to resume this campaign")
        if found == STORE_FORMAT:
            return  # nothing to migrate: resuming writes nothing before the first trial
        with self.transaction():
            for version in range(found + 1, STORE_FORMAT + 1):
                for table, column, kind in _MIGRATIONS[version]:
                    columns = {row[1] for row in self.db.execute(f"PRAGMA table_info({table})")}
                    if column not in columns:
                        self.db.execute(f"ALTER TABLE {table} ADD COLUMN {column} {kind}")
                if version in _REWRITES:
                    _REWRITES[version](self.db)
            self.db.execute("INSERT OR REPLACE INTO campaign (key, value) VALUES ('store_format', ?)", (str(STORE_FORMAT),))

    def _claim(self, spec) -> None:
        existing = self.meta()
        if existing:
            if existing.get("fingerprint") != spec.fingerprint:  # locate() only picks stores it can grow
                problem = growth_problem(self.stored_spec(), spec.raw)
                if problem:
                    raise InputError(str(self.path), refusal(spec.name, problem), REFUSAL_FIX)
                self._grow(spec, existing)
            return
        values = {"name": self.path.stem, "spec_name": spec.name, "fingerprint": spec.fingerprint,
                  "spec": canonical_json(spec.raw), "root_seed": str(spec.root_seed),
                  "schema_version": str(SCHEMA_VERSION), "store_format": str(STORE_FORMAT),
                  "plugins": ",".join(spec.plugins)}
        with self.transaction():
            self.db.executemany("INSERT INTO campaign (key, value) VALUES (?, ?)", sorted(values.items()))

    def _grow(self, spec, existing: dict) -> None:
        """Record ``spec`` as the campaign's spec; the one before joins ``grown_from``."""
        history = json.loads(existing.get("grown_from", "[]")) + [existing.get("fingerprint")]
        values = {"fingerprint": spec.fingerprint, "spec": canonical_json(spec.raw), "grown_from": json.dumps(history),
                  "plugins": ",".join(spec.plugins)}
        with self.transaction():
            self.db.executemany("INSERT OR REPLACE INTO campaign (key, value) VALUES (?, ?)", sorted(values.items()))

    # ----- writing --------------------------------------------------------------------------
    def transaction(self):
        return Transaction(self.db, self.path)

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
        return campaign_settings(self.db)

    def meta_int(self, key: str, default: int) -> int:
        """An integer setting of the campaign table (InputError when the store holds something else)."""
        value = self.meta().get(key, default)
        try:
            return int(value)
        except (TypeError, ValueError):
            raise InputError(str(self.path), f"campaign setting {key} = {value!r} is not an integer", DAMAGED_FIX) from None

    def stored_spec(self) -> dict:
        """The spec the campaign was run with (the parsed TOML, as stored)."""
        return stored_spec_of(self.meta(), self.path)

    def done_trial_ids(self) -> set[str]:
        return {row[0] for row in self.db.execute("SELECT DISTINCT trial_id FROM trials")}

    def stored_retrievals(self) -> dict[str, set]:
        """trial id -> the retrievals it has rows for."""
        stored: dict[str, set] = {}
        for trial_id, retrieval in self.db.execute("SELECT trial_id, retrieval FROM trials"):
            stored.setdefault(trial_id, set()).add(retrieval)
        return stored

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

    def trial_rows_of(self, trial_ids: list[str]) -> list[dict]:
        """The stored rows of these trials (one per retrieval), in chunks below SQLite's variable limit."""
        rows: list[dict] = []
        for start in range(0, len(trial_ids), 500):
            chunk = trial_ids[start:start + 500]
            cursor = self.db.execute(f"SELECT * FROM trials WHERE trial_id IN ({', '.join('?' * len(chunk))}) ORDER BY rowid", chunk)
            names = [d[0] for d in cursor.description]
            rows += [dict(zip(names, row)) for row in cursor.fetchall()]
        return rows

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
        try:
            self.db.close()
        except sqlite3.Error:  # a broken disk must not hide the error that stopped the run
            pass
        unlock(self._lock_fd)
        self._lock_fd = None
