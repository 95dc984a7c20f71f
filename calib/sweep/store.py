"""The campaign store: one SQLite file per campaign, written only by the coordinating process.

WAL journal, one transaction per finished trial, trial rows append-only. Tables:

- ``campaign`` (key, value): name, spec fingerprint and text, root seed, schema version, store
  format.
- ``environments`` (env_id, versions): package versions of each process that produced rows.
- ``instances``: one row per instance with its size, the cached original solve (the reference
  method's) and its fair baseline: ``baseline_method``, ``baseline_seconds`` and ``methods`` (JSON:
  every configured method's status, solver code and message, value, seconds, iterations, options;
  see :mod:`calib.solvers.methods`).
- ``trials``: one row per (trial, retrieval) with identity, status, message, metrics (JSON),
  seconds, stream key, root seed, solver options and environment.

Re-opening with the same spec resumes. A different spec under the same campaign name *grows* the
campaign in the same store when it leaves every stored trial's numbers unchanged
(:func:`growth_problem`: same root seed, same ``[solver]``): more replicates, instances, sizes, k
values, projectors, families or retrievals, another k search or ``[target]``. Trial identities and
streams do not depend on the rest of the spec, so every stored trial is reused and only new ones
run; the campaign table then holds the new spec and ``grown_from`` lists the fingerprints before.
A change that would alter stored trials is refused with the reason, unless a new campaign is asked
for, which then lives beside it as ``<name>-2.sqlite``, ``-3``...

Store formats (``campaign.store_format``): 1 (no key) had no ``root_seed`` and ``solver_options``
trial columns; opening it for writing migrates it to 2 by adding them (old rows keep NULL there:
their root seed is the last element of ``stream_key``, their solver options the spec's). Format 2
had no fair baseline; 3 adds the instance columns ``baseline_method``, ``baseline_seconds`` and
``methods`` (old rows keep NULL: their baseline is their original solve time).
"""

from __future__ import annotations

import fcntl
import io
import json
import os
import sqlite3
import sys
from pathlib import Path
from typing import Iterable, Optional
from urllib.parse import quote

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
    orig_seconds REAL, orig_iterations INTEGER, solver_options TEXT, orig_x BLOB, build_seconds REAL,
    baseline_method TEXT, baseline_seconds REAL, methods TEXT
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
STORE_FORMAT = 3

#: columns added by each migration: format -> [(table, column, type)]
_MIGRATIONS = {2: [("trials", "root_seed", "INTEGER"), ("trials", "solver_options", "TEXT")],
               3: [("instances", "baseline_method", "TEXT"), ("instances", "baseline_seconds", "REAL"),
                   ("instances", "methods", "TEXT")]}


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


#: the tables every calib store has
TABLES = ("campaign", "environments", "instances", "trials")

#: the fix shown for a store whose rows calib could not have written
DAMAGED_FIX = "the store was changed outside calib; restore a copy, or run the spec again into a new --out folder"

#: the fix shown when the store cannot be written (disk full, read-only folder or file, I/O error)
WRITE_FIX = ("free disk space or make the folder and the store writable, then run the same command again: "
             "every trial stored so far is kept and the run resumes")


class StoreWriteError(InputError):
    """The store could not be written; everything committed before stays (one transaction per trial)."""

    def __init__(self, path: Path, error: BaseException):
        super().__init__(str(path), f"cannot write the store ({error})", WRITE_FIX)


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
        if not path.is_file():
            raise InputError(str(path), "no such store", "give the .sqlite file that `calib run` printed")
        try:
            connection, found = connect_readonly(path)
        except sqlite3.DatabaseError:
            raise InputError(str(path), "not a calib store (unreadable SQLite)", "point at a .sqlite file written by `calib run`") from None
        missing = [name for name in TABLES if name not in found]
        if missing:
            connection.close()
            raise InputError(str(path), f"not a calib store (no table {missing[0]!r})", "point at a .sqlite file written by `calib run`")
        return cls(path, connection)

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
        lock_fd = _lock(path)
        try:
            store = cls(path, sqlite3.connect(path, isolation_level=None), lock_fd)
        except sqlite3.DatabaseError as error:
            _unlock(lock_fd)
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
        return _Transaction(self.db, self.path)

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

    def meta_int(self, key: str, default: int) -> int:
        """An integer setting of the campaign table (InputError when the store holds something else)."""
        value = self.meta().get(key, default)
        try:
            return int(value)
        except (TypeError, ValueError):
            raise InputError(str(self.path), f"campaign setting {key} = {value!r} is not an integer", DAMAGED_FIX) from None

    def stored_spec(self) -> dict:
        """The spec the campaign was run with (the parsed TOML, as stored)."""
        try:
            spec = json.loads(self.meta().get("spec", "{}"))
        except ValueError:
            spec = None
        if not isinstance(spec, dict):
            raise InputError(str(self.path), "the stored spec is not a JSON object", DAMAGED_FIX)
        return spec

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
        _unlock(self._lock_fd)
        self._lock_fd = None


def connect_readonly(path: Path) -> tuple[sqlite3.Connection, set]:
    """A read-only connection to ``path`` and the names of its tables.

    A store in WAL mode needs its ``-shm`` file even for reading; in a read-only folder (a
    read-only mount, a shared results folder) that file cannot be created, so the store is then
    opened as immutable, which is exact when no ``-wal`` file holds writes not yet merged (calib
    merges them when a run ends). The path is URI-quoted, so names holding ``?``, ``#`` or ``%``
    open the right file.
    """
    uri = f"file:{quote(str(Path(path).resolve()))}?mode=ro"
    try:
        return _tables(sqlite3.connect(uri, uri=True))
    except sqlite3.OperationalError:
        folder = Path(path).resolve().parent
        if os.access(folder, os.W_OK):
            raise
    wal = Path(f"{path}-wal")
    if wal.exists() and wal.stat().st_size > 0:
        raise InputError(str(path), f"the folder is read-only and {wal.name} holds writes not merged into the store",
                         "copy the folder (all three files) somewhere writable and read the copy")
    return _tables(sqlite3.connect(uri + "&immutable=1", uri=True))


def _tables(connection: sqlite3.Connection) -> tuple[sqlite3.Connection, set]:
    try:
        return connection, {row[0] for row in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    except sqlite3.DatabaseError:
        connection.close()
        raise


def store_path(out_dir: str | Path, name: str, number: int) -> Path:
    """``<out>/<name>.sqlite`` for the first campaign of that name, ``<out>/<name>-<number>.sqlite`` after."""
    return Path(out_dir) / (f"{name}.sqlite" if number == 1 else f"{name}-{number}.sqlite")


def stored_fingerprint(path: Path) -> Optional[str]:
    """The spec fingerprint of an existing store (None for an empty file)."""
    try:
        connection, tables = connect_readonly(path)
        try:
            if "campaign" not in tables:
                return None
            row = connection.execute("SELECT value FROM campaign WHERE key = 'fingerprint'").fetchone()
        finally:
            connection.close()
    except sqlite3.DatabaseError:
        raise InputError(str(path), "not a calib store (unreadable SQLite)", "move the file away or choose another --out folder") from None
    return row[0] if row else None


#: spec keys whose change alters the numbers of stored trials, with why
_TRIAL_ALTERING = (("campaign", "root_seed", "every instance and random stream derives from it"),
                   ("solver", None, "every stored solve used the old settings"))

#: the fix shown when a changed spec would alter stored trials
REFUSAL_FIX = ("restore that setting to grow the campaign in place (more replicates, instances, k values, projectors, "
               "families or retrievals reuse every stored trial), pass --new-campaign, or rename the campaign")


def growth_problem(stored: dict, new: dict) -> str:
    """Why running the parsed spec ``new`` into a store of ``stored`` would alter stored trials ("" if it would not).

    >>> growth_problem({"campaign": {"root_seed": 1, "replicates": 6}}, {"campaign": {"root_seed": 1, "replicates": 15}})
    ''
    >>> growth_problem({"campaign": {"root_seed": 1}}, {"campaign": {"root_seed": 2}})
    'campaign.root_seed changes from 1 to 2 (every instance and random stream derives from it)'
    """
    from calib.sweep.spec import solver_settings

    for table, key, why in _TRIAL_ALTERING:
        before, after = stored.get(table, {}), new.get(table, {})
        if key is not None:
            before, after = before.get(key), after.get(key)
        else:  # compare the settings in force, defaults filled in
            before, after = solver_settings(before), solver_settings(after)
        if canonical_json(before) != canonical_json(after):
            name = f"{table}.{key}" if key else f"[{table}]"
            return f"{name} changes from {canonical_json(before)} to {canonical_json(after)} ({why})"
    return ""


def refusal(name: str, problem: str) -> str:
    return f"campaign {name!r} already exists with a different spec that would change its stored trials: {problem}"


def locate(spec, out_dir: str | Path, new_campaign: bool = False) -> tuple[Path, bool]:
    """Where the store of ``spec`` lives and whether it exists already.

    The store holding the same spec (``<name>.sqlite``, ``<name>-2.sqlite``, ...) is resumed. When
    none does, the newest store whose trials the spec leaves unchanged grows (:func:`growth_problem`);
    when there is none either, this refuses with the reason unless ``new_campaign`` asks for the
    next free ``<name>-N.sqlite`` (which it also does instead of growing).
    """
    number, found = 1, []
    while True:
        path = store_path(out_dir, spec.name, number)
        if not path.exists():
            break
        if stored_fingerprint(path) in (spec.fingerprint, None):
            return path, True
        found.append(path)
        number += 1
    if found and not new_campaign:
        problem = ""
        for candidate in reversed(found):
            problem = growth_problem(_stored_spec_at(candidate), spec.raw)
            if not problem:
                return candidate, True
        raise InputError(str(found[-1]), refusal(spec.name, problem), REFUSAL_FIX)
    return path, False


def _stored_spec_at(path: Path) -> dict:
    store = Store.open_existing(path)
    try:
        return store.stored_spec()
    finally:
        store.close()


def _lock(path: Path) -> int:
    """An exclusive ``flock`` on the store file (created empty when new): one writer per store.

    flock is independent of the POSIX record locks SQLite itself uses (Linux ``flock(2)``), and the
    kernel drops it when the process dies, so a killed run never leaves a stale lock behind.
    """
    try:
        fd = os.open(path, os.O_RDONLY | os.O_CREAT, 0o666)
    except OSError as error:
        raise StoreWriteError(path, error.strerror or error) from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        raise InputError(str(path), "another `calib run` is writing this store right now",
                         "wait for it to finish (or stop it), then run the same command again to resume") from None
    return fd


def _unlock(fd: Optional[int]) -> None:
    if fd is not None:
        os.close(fd)  # closing the descriptor releases the flock


class _Transaction:
    """One write transaction; a write the disk refuses becomes :class:`StoreWriteError` after a rollback.

    Only ``sqlite3.OperationalError`` is the environment's (full disk, read-only file or folder, I/O
    error, a lock held elsewhere); any other SQLite error is a bug and keeps its traceback.
    """

    def __init__(self, db: sqlite3.Connection, path: Path):
        self.db = db
        self.path = path

    def __enter__(self):
        try:
            self.db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as error:
            raise StoreWriteError(self.path, error) from None
        return self.db

    def __exit__(self, kind, value, traceback):
        try:
            self.db.execute("COMMIT" if kind is None else "ROLLBACK")
        except sqlite3.OperationalError as error:
            if kind is None:
                self._rollback()
                raise StoreWriteError(self.path, error) from None
        if kind is not None and issubclass(kind, sqlite3.OperationalError):
            raise StoreWriteError(self.path, value) from None
        return False

    def _rollback(self) -> None:
        try:
            self.db.execute("ROLLBACK")
        except sqlite3.Error:
            pass  # SQLite already rolled the transaction back


def json_or_none(value) -> Optional[str]:
    return None if value is None else json.dumps(value, sort_keys=True, allow_nan=False)
