"""Killing the coordinator (kill -9, Ctrl-C) loses nothing and duplicates nothing.

SQLite guarantees that a transaction interrupted before COMMIT leaves no trace and a committed one
survives a process crash, in WAL mode too (sqlite.org, "Atomic Commit In SQLite" and
"Write-Ahead Logging"). These tests check that calib's coordinator keeps one trial per
transaction on top of that: after a kill at any point and a re-run, every trial is stored exactly
once and the safe-k table is byte-identical to the table of an uninterrupted run.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from engine_helpers import row_counts, table_bytes, write_spec

from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec

DRIVER = Path(__file__).with_name("engine_kill_driver.py")


def _env() -> dict:
    root = str(Path(__file__).resolve().parents[1])
    return {**os.environ, "PYTHONPATH": os.pathsep.join([root, str(DRIVER.parent)])}


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """Uninterrupted runs: replicates -> table bytes."""
    tables = {}
    for replicates in (4, 16):
        folder = tmp_path_factory.mktemp(f"reference{replicates}")
        summary = run_campaign(load_spec(write_spec(folder, replicates=replicates)), folder / "out", inline=True)
        tables[replicates] = table_bytes(summary.store_path)
    return tables


def _resume_and_compare(spec_path: Path, store: Path, expected_trials: int, reference_table: bytes,
                        **executor) -> None:
    rows, distinct = row_counts(store)
    assert rows == distinct < expected_trials  # one row per trial (one retrieval), and it stopped early
    summary = run_campaign(load_spec(spec_path), store.parent, **(executor or {"inline": True}))
    assert summary.skipped == distinct and summary.ran == expected_trials - distinct
    assert row_counts(store) == (expected_trials, expected_trials)
    assert table_bytes(store) == reference_table


@pytest.mark.parametrize("mode, count, stored_trials", [
    ("after-instance-commit", 1, 0),
    ("mid-instance-transaction", 2, None),
    ("mid-trial-transaction", 1, 0),
    ("mid-trial-transaction", 37, 36),
    ("after-trial-commit", 80, 80),
])
def test_kill9_at_exact_points_then_resume(tmp_path, reference, mode, count, stored_trials):
    spec = write_spec(tmp_path)
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, str(DRIVER), mode, str(count), "run", str(spec), "--out", str(out),
                           "--workers", "2", "--quiet"], env=_env(), capture_output=True, text=True, timeout=120)
    assert done.returncode == -signal.SIGKILL, done.stderr
    store = out / "tiny.sqlite"
    if stored_trials is not None:
        assert row_counts(store)[1] == stored_trials
    with sqlite3.connect(store) as db:
        instances = db.execute("SELECT COUNT(*) FROM instances").fetchone()[0]
    if mode == "after-instance-commit":
        assert instances == 1
    if mode == "mid-instance-transaction":
        assert instances == 1  # the second original's transaction left no trace
    _resume_and_compare(spec, store, 120, reference[4])


def _children(pid: int) -> list[int]:
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                found.append(int(entry.name))
    return found


def _gone(pids: list[int], within_s: float) -> bool:
    deadline = time.monotonic() + within_s
    while time.monotonic() < deadline:
        alive = []
        for pid in pids:
            try:
                state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
            except OSError:
                continue
            if state != "Z":
                alive.append(pid)
        if not alive:
            return True
        time.sleep(0.05)
    return False


def _start_and_kill(spec: Path, out: Path, how: str):
    """Run the campaign in a subprocess and send it ``how`` once 40 trials are stored: (process, its
    workers, its stderr), or None when the run had already finished (a fast machine): nothing was cut."""
    store = out / "tiny.sqlite"
    process = subprocess.Popen([sys.executable, "-m", "calib", "run", str(spec), "--out", str(out), "--workers", "2", "--quiet"],
                               env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and not (store.exists() and _safe_count(store) >= 40):
            time.sleep(0.002)
        workers = _children(process.pid)
        if process.poll() is not None:
            process.communicate()
            return None
        os.kill(process.pid, getattr(signal, how))
        _, err = process.communicate(timeout=30)
    finally:
        if process.poll() is None:
            process.kill()
    return process, workers, err


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc to find worker processes")
@pytest.mark.parametrize("how", ["SIGKILL", "SIGINT"])
def test_external_kill_mid_run_then_resume(tmp_path, reference, how):
    spec = write_spec(tmp_path, replicates=16)
    for attempt in range(3):  # a run that finished before the signal tests nothing: run it again, afresh
        out = tmp_path / f"out{attempt}"
        killed = _start_and_kill(spec, out, how)
        if killed is not None:
            break
    assert killed is not None, "the run finished before it could be interrupted, three times"
    process, workers, err = killed
    store = out / "tiny.sqlite"
    if how == "SIGKILL":
        assert process.returncode == -signal.SIGKILL
    else:
        assert process.returncode == 130 and "everything finished so far is stored" in err and "Traceback" not in err
    assert len(workers) == 2 and _gone(workers, within_s=5.0)  # no orphaned worker processes
    _resume_and_compare(spec, store, 480, reference[16], workers=2)


def _safe_count(store: Path) -> int:
    try:
        return row_counts(store)[1]
    except sqlite3.Error:
        return 0
