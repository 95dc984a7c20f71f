"""Faults of the environment end in a stated, resumable state with nothing lost.

Covered elsewhere (not repeated here): a trial that raises, segfaults its worker or hangs past
``trial_timeout_s`` becomes a row with status error / crashed / timeout and the campaign goes on
(tests/test_engine_executors.py); ``kill -9`` of the coordinator at exact points of its store
writes and Ctrl-C / SIGKILL from outside lose nothing and duplicate nothing
(tests/test_engine_kill.py). Here: a worker killed from outside, a full disk (simulated through
SQLite's page limit, and, when the tests run as root, a real 256 KiB tmpfs), a read-only results
folder, a read-only store file, a second coordinator on the same store, and Ctrl-C in-process.

Facts relied on: SQLite rolls back a transaction whose write fails with SQLITE_FULL or
SQLITE_READONLY and keeps every committed one (sqlite.org, "Atomic Commit In SQLite", "Result
and Error Codes"); ``PRAGMA max_page_count`` makes a database report SQLITE_FULL once it would
grow past that many pages (sqlite.org, "Pragma statements"); root ignores file permission bits,
so read-only states are made with a read-only bind mount or ``chattr +i`` when running as root.
"""

from __future__ import annotations

import contextlib
import os
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from engine_faults import fault_plugin  # noqa: F401  (fixture)
from engine_helpers import row_counts, table_bytes, write_spec

from calib.cli import main
from calib.store import database as store_module
from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec

ROOT = Path(__file__).resolve().parents[1]
TOTAL = 120  # trials of the tiny spec with 4 replicates


@pytest.fixture(scope="module")
def reference(tmp_path_factory) -> bytes:
    """Table bytes of an uninterrupted run of the tiny spec."""
    folder = tmp_path_factory.mktemp("reference")
    summary = run_campaign(load_spec(write_spec(folder)), folder / "out", inline=True)
    return table_bytes(summary.store_path)


def _one_line(capsys) -> str:
    captured = capsys.readouterr()
    lines = captured.err.splitlines()
    assert len(lines) == 1 and "Traceback" not in captured.err, captured.err
    return lines[0]


def _integrity(store: Path) -> str:
    connection = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
    try:
        return connection.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        connection.close()


def _rows(store: Path) -> list:
    connection = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
    try:
        return connection.execute("SELECT trial_id, retrieval, status, metrics FROM trials ORDER BY 1, 2").fetchall()
    finally:
        connection.close()


def _partial_store(folder: Path, stop_after: int = 30) -> tuple[Path, Path]:
    """(spec, store) of the tiny campaign stopped by Ctrl-C (KeyboardInterrupt) after some trials."""
    spec = write_spec(folder)

    def interrupt(progress):
        if progress.done == stop_after:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_campaign(load_spec(spec), folder / "out", inline=True, progress=interrupt)
    store = folder / "out" / "tiny.sqlite"
    assert row_counts(store) == (stop_after, stop_after)
    return spec, store


def _resume_and_compare(spec: Path, store: Path, reference: bytes) -> None:
    summary = run_campaign(load_spec(spec), store.parent, inline=True)
    assert summary.ran == TOTAL - summary.skipped and row_counts(store) == (TOTAL, TOTAL)
    assert table_bytes(store) == reference


# ----- read-only states ----------------------------------------------------------------------
def _run_quietly(command: list[str]) -> bool:
    return subprocess.run(command, capture_output=True).returncode == 0


@contextlib.contextmanager
def read_only(path: Path):
    """``path`` (a folder or a file) read-only for this process, restored afterwards.

    Not root: permission bits. Root (which ignores them): a read-only bind mount for a folder,
    the immutable attribute for a file; skipped where neither is possible.
    """
    if os.geteuid() != 0:
        mode = path.stat().st_mode
        path.chmod(0o555 if path.is_dir() else 0o444)
        try:
            yield
        finally:
            path.chmod(mode)
        return
    if path.is_dir():
        if not (_run_quietly(["mount", "--bind", str(path), str(path)])
                and _run_quietly(["mount", "-o", "remount,bind,ro", str(path)])):
            _run_quietly(["umount", str(path)])
            pytest.skip("cannot make a read-only bind mount here")
        undo = ["umount", str(path)]
    else:
        if not _run_quietly(["chattr", "+i", str(path)]):
            pytest.skip("cannot set the immutable attribute here")
        undo = ["chattr", "-i", str(path)]
    try:
        yield
    finally:
        assert _run_quietly(undo)


def test_read_only_results_folder_refuses_a_new_store_and_creates_nothing(tmp_path, capsys):
    spec = write_spec(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    with read_only(out):
        assert main(["run", str(spec), "--out", str(out), "--in-process", "--quiet"]) == 2
        line = _one_line(capsys)
    assert str(out / "tiny.sqlite") in line and "cannot write the store" in line and "run the same command again" in line
    assert list(out.iterdir()) == []


@pytest.mark.parametrize("what", ["folder", "store file"])
def test_read_only_store_is_left_untouched_then_resumes(tmp_path, reference, capsys, what):
    spec, store = _partial_store(tmp_path)
    before = (store.read_bytes(), _rows(store))
    with read_only(store.parent if what == "folder" else store):
        assert main(["run", str(spec), "--out", str(store.parent), "--in-process", "--quiet"]) == 2
        line = _one_line(capsys)
        assert str(store) in line and "cannot write the store" in line
        assert (store.read_bytes(), _rows(store)) == before
        # reading still works: tables of what is stored so far, even from a read-only folder
        assert main(["tables", str(store)]) == 0
        capsys.readouterr()
    _resume_and_compare(spec, store, reference)


# ----- a full disk ----------------------------------------------------------------------------
def test_full_disk_simulated_stops_with_one_line_keeps_whole_trials_and_resumes(tmp_path, reference, monkeypatch, capsys):
    # simulation: SQLite's page limit makes the store report "database or disk is full" (SQLITE_FULL)
    # a few pages after opening, exactly as a full disk would; no filesystem is filled
    opened = store_module.Store.create_or_resume.__func__

    def limited(cls, *args, **kwargs):
        store = opened(cls, *args, **kwargs)
        pages = store.db.execute("PRAGMA page_count").fetchone()[0]
        store.db.execute(f"PRAGMA max_page_count = {pages + 6}")
        return store

    monkeypatch.setattr(store_module.Store, "create_or_resume", classmethod(limited))
    spec = write_spec(tmp_path)
    store = tmp_path / "out" / "tiny.sqlite"
    assert main(["run", str(spec), "--out", str(store.parent), "--in-process", "--quiet"]) == 2
    line = _one_line(capsys)
    assert line.startswith(f"calib: error: {store}: cannot write the store (database or disk is full)")
    rows, distinct = row_counts(store)
    assert 0 < rows == distinct < TOTAL and _integrity(store) == "ok"  # whole trials only
    monkeypatch.undo()
    _resume_and_compare(spec, store, reference)


@pytest.mark.skipif(os.geteuid() != 0, reason="mounting a tmpfs needs root")
def test_full_disk_on_a_real_tiny_filesystem(tmp_path, reference):
    mount = tmp_path / "tiny-disk"
    mount.mkdir()
    if not _run_quietly(["mount", "-t", "tmpfs", "-o", "size=256k", "calib-test", str(mount)]):
        pytest.skip("cannot mount a tmpfs here")
    try:
        spec = write_spec(tmp_path)
        env = {**os.environ, "PYTHONPATH": str(ROOT)}
        done = subprocess.run([sys.executable, "-m", "calib", "run", str(spec), "--out", str(mount), "--workers", "2", "--quiet"],
                              env=env, capture_output=True, text=True, timeout=120)
        store = mount / "tiny.sqlite"
        assert done.returncode == 2 and "Traceback" not in done.stderr and len(done.stderr.splitlines()) == 1, done.stderr
        assert "database or disk is full" in done.stderr
        rows, distinct = row_counts(store)
        assert 0 < rows == distinct < TOTAL and _integrity(store) == "ok"
        assert _run_quietly(["mount", "-o", "remount,size=16m", str(mount)])  # space freed
        _resume_and_compare(spec, store, reference)
    finally:
        _run_quietly(["umount", str(mount)])


# ----- concurrency and workers --------------------------------------------------------------
def test_a_second_coordinator_on_the_same_store_is_refused(tmp_path, capsys):
    spec, store = _partial_store(tmp_path)
    before = _rows(store)
    holder = store_module.Store.create_or_resume(load_spec(spec), store.parent)  # a run in progress
    try:
        assert main(["run", str(spec), "--out", str(store.parent), "--in-process", "--quiet"]) == 2
        line = _one_line(capsys)
        assert str(store) in line and "another `calib run` is writing this store" in line
        assert _rows(store) == before
    finally:
        holder.close()
    assert main(["run", str(spec), "--out", str(store.parent), "--in-process", "--quiet"]) == 0  # lock released


def _kill_when_written(pid_file: Path, killed: list) -> None:
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and not pid_file.exists():
        time.sleep(0.01)
    if pid_file.exists():
        pid = int(pid_file.read_text())
        os.kill(pid, signal.SIGKILL)  # as the OOM killer would
        killed.append(pid)


def _fault_spec() -> str:
    """The faulty-LP spec of the executor tests with k = 1 (raise), 2 (segfault), 4 (normal), 5 (killed from outside)."""
    from test_engine_executors import FAULTY_SPEC

    return FAULTY_SPEC.replace("k = [1, 2, 3, 4, 6]", "k = [1, 2, 4, 5]").replace("trial_timeout_s = 2", "trial_timeout_s = 60").replace(
        '[[families]]\nname = "test-faulty-lp"\nsizes = [{{rows = 14, cols = 28}}]\nparams = {{original = "segfault"}}\n', "")


def test_worker_killed_from_outside_is_one_crashed_row_and_a_rerun_loses_nothing(tmp_path, fault_plugin, monkeypatch):
    pid_file = tmp_path / "worker.pid"
    monkeypatch.setenv("CALIB_TEST_PID_FILE", str(pid_file))
    spec = load_spec(write_spec(tmp_path, "faulty", replicates=1, text=_fault_spec()))
    killed: list = []
    killer = threading.Thread(target=_kill_when_written, args=(pid_file, killed), daemon=True)
    killer.start()
    summary = run_campaign(spec, tmp_path / "out", workers=2)
    killer.join(timeout=5)
    with sqlite3.connect(summary.store_path) as db:
        rows = dict((k, (status, message)) for k, status, message in db.execute("SELECT k, status, message FROM trials"))
    assert len(killed) == 1 and len(rows) == summary.planned == 4
    assert rows[5][0] == "crashed" and "worker process killed by SIGKILL" in rows[5][1]
    # every other trial has its own outcome: the injected exception, the segfault, a normal solve
    assert rows[1][0] == "error" and rows[2][0] == "crashed" and "SIGSEGV" in rows[2][1] and rows[4][0] == "ok"
    before = _rows(summary.store_path)
    again = run_campaign(spec, tmp_path / "out", workers=2)
    assert again.ran == 0 and again.skipped == 4 and _rows(summary.store_path) == before  # stated, complete, kept


def _sandbox_children() -> list[int]:
    """Process ids of this process's sandbox workers (read from /proc)."""
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                parent = int((entry / "stat").read_text().rsplit(")", 1)[1].split()[1])
                command = (entry / "cmdline").read_bytes()
            except (OSError, ValueError, IndexError):
                continue
            if parent == os.getpid() and b"child_main" in command:
                found.append(int(entry.name))
    return found


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc to find worker processes")
def test_a_worker_that_dies_while_idle_is_replaced_without_blaming_the_next_task(tmp_path):
    from calib.sweep.executors import LocalPool
    from calib.sweep.expansion import expand
    from calib.sweep.tasks import OriginalTask

    spec = load_spec(write_spec(tmp_path))
    refs = [ref for ref, _ in expand(spec)][:2]
    pool = LocalPool(1)
    try:
        first = OriginalTask(refs[0], spec.solver)
        pool.submit(first.token, first, 60.0)
        assert "row" in pool.next_done().result
        (worker,) = _sandbox_children()
        os.kill(worker, signal.SIGKILL)  # dies between two tasks
        os.waitid(os.P_PID, worker, os.WEXITED | os.WNOWAIT)
        second = OriginalTask(refs[1], spec.solver)
        pool.submit(second.token, second, 60.0)
        done = pool.next_done()
        assert done.token == second.token and "row" in done.result  # ran in a fresh worker, not "crashed"
        assert _sandbox_children() != [worker]
    finally:
        pool.close()
