"""The SQLite file of a store: read-only connections, the one-writer lock, write transactions.

- Reading (:func:`connect_readonly`, :func:`open_checked`): ``mode=ro`` URI connections; in a
  read-only folder, where WAL's ``-shm`` file cannot be created, the store opens as immutable, which
  is exact only while no ``-wal`` file holds unmerged writes (refused otherwise).
- Writing: one writer per store, held by an exclusive ``flock`` on the store file (:func:`lock`),
  which the kernel drops when the process dies; each write is one ``BEGIN IMMEDIATE`` transaction
  (:class:`Transaction`), and a write the environment refuses (full disk, read-only file, I/O error)
  becomes a :class:`StoreWriteError` after a rollback: everything committed before stays.

Costs: O(1) per call besides SQLite's own work.
"""

from __future__ import annotations

import fcntl
import os
import sqlite3
from pathlib import Path
from typing import Optional
from urllib.parse import quote

from calib.errors import InputError
from calib.store.schema import TABLES


#: the fix shown for a store whose rows calib could not have written
DAMAGED_FIX = "the store was changed outside calib; restore a copy, or run the spec again into a new --out folder"


#: the fix shown when the store cannot be written (disk full, read-only folder or file, I/O error)
WRITE_FIX = ("free disk space or make the folder and the store writable, then run the same command again: "
             "every trial stored so far is kept and the run resumes")


class StoreWriteError(InputError):
    """The store could not be written; everything committed before stays (one transaction per trial)."""

    def __init__(self, path: Path, error: BaseException):
        super().__init__(str(path), f"cannot write the store ({error})", WRITE_FIX)


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


def open_checked(path: Path) -> sqlite3.Connection:
    """A read-only connection to the calib store at ``path``; raises :class:`InputError` when it is not one."""
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
    return connection


def lock(path: Path) -> int:
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


def unlock(fd: Optional[int]) -> None:
    if fd is not None:
        os.close(fd)  # closing the descriptor releases the flock


class Transaction:
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
