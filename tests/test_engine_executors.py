"""Executors give the same numbers; failures become rows; originals are solved once.

Reference for the equality checks: a trial is a pure function of its identity (DEVELOPERS.md,
"Randomness"), so the serial in-process run is the reference every executor
must reproduce byte for byte in the safe-k tables. Signal names come from POSIX via Python's
``signal`` module (SIGSEGV for an invalid memory access).
"""

from __future__ import annotations

import json
import sqlite3

import pytest
from engine_faults import fault_plugin  # noqa: F401  (fixture)
from engine_helpers import search_verdicts, table_bytes, trial_ids, write_search_spec, write_spec

from calib.store.schema import STORE_FORMAT
from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec


@pytest.fixture(scope="module")
def serial_table(tmp_path_factory):
    folder = tmp_path_factory.mktemp("serial")
    summary = run_campaign(load_spec(write_spec(folder)), folder / "out", inline=True)
    assert summary.ran == 120 and summary.statuses == {"ok": 120}
    return table_bytes(summary.store_path)


def test_local_pool_matches_serial_run_byte_for_byte(tmp_path, serial_table):
    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", workers=2)
    assert summary.executor == "local pool" and summary.statuses == {"ok": 120}
    assert table_bytes(summary.store_path) == serial_table


def test_one_worker_pool_matches_serial_run(tmp_path, serial_table):
    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", workers=1)
    assert table_bytes(summary.store_path) == serial_table


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  host="127.0.0.1") as local_cluster:
        yield local_cluster


def _workers(client) -> set:
    """Addresses of the Dask workers, as the scheduler knows them (a restarted worker gets a new one)."""
    return set(client.scheduler_info()["workers"])


def test_dask_local_cluster_matches_serial_run_byte_for_byte(tmp_path, serial_table, cluster):
    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", scheduler=cluster.scheduler_address)
    assert summary.executor == "dask" and summary.statuses == {"ok": 120} and summary.lost == 0
    assert table_bytes(summary.store_path) == serial_table


def test_a_k_search_on_dask_and_the_pool_matches_the_serial_search(tmp_path, cluster):
    spec = load_spec(write_search_spec(tmp_path))
    serial = run_campaign(spec, tmp_path / "serial", inline=True)
    for name, where in (("dask", {"scheduler": cluster.scheduler_address}), ("pool", {"workers": 2})):
        summary = run_campaign(spec, tmp_path / name, **where)
        assert search_verdicts(summary) == search_verdicts(serial) and summary.lost == 0
        assert trial_ids(summary.store_path) == trial_ids(serial.store_path)


def test_dask_survives_a_lost_worker(tmp_path, serial_table, cluster):
    import os
    import signal

    from distributed import Client

    with Client(cluster.scheduler_address) as client:
        address, victim = next(iter(client.run(os.getpid).items()))

    def kill_one_worker(progress):
        if progress.done == 30:
            os.kill(victim, signal.SIGKILL)  # the nanny restarts it; Dask reschedules its tasks

    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", scheduler=cluster.scheduler_address,
                           progress=kill_one_worker)
    assert summary.statuses == {"ok": 120} and summary.lost == 0
    assert table_bytes(summary.store_path) == serial_table
    with Client(cluster.scheduler_address) as client:
        client.wait_for_workers(2, timeout=60)
        assert address not in _workers(client)  # the worker really was replaced


def test_originals_are_solved_once_per_instance_and_reused_on_resume(tmp_path):
    spec_path = write_spec(tmp_path)
    first = run_campaign(load_spec(spec_path), tmp_path / "out", workers=2)
    assert first.originals_solved == 6  # 6 instances, 120 trials
    # grow the grid: new replicates of the same instances reuse the stored originals
    grown = write_spec(tmp_path, replicates=6)
    text = grown.read_text().replace('name = "tiny"', 'name = "tiny"\ndescription = "grown"')
    grown.write_text(text)
    second = run_campaign(load_spec(grown), tmp_path / "out", inline=True, new_campaign=True)
    assert second.store_path.name == "tiny-2.sqlite" and second.originals_solved == 6
    again = run_campaign(load_spec(grown), tmp_path / "out", workers=2)
    assert (again.ran, again.skipped, again.originals_solved) == (0, 180, 0)
    with sqlite3.connect(first.store_path) as db:
        assert db.execute("SELECT COUNT(*) FROM instances").fetchone()[0] == 6


def test_rows_carry_provenance(tmp_path):
    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", workers=2)
    with sqlite3.connect(summary.store_path) as db:
        row = db.execute("SELECT stream_key, root_seed, solver_options, env_id FROM trials LIMIT 1").fetchone()
        versions = json.loads(db.execute("SELECT versions FROM environments WHERE env_id = ?", (row[3],)).fetchone()[0])
        meta = dict(db.execute("SELECT key, value FROM campaign").fetchall())
    assert json.loads(row[0])[-1] == row[1] == 424242
    assert json.loads(row[2]) == {"time_limit_s": 20.0, "trial_timeout_s": 100.0}
    assert {"calib", "numpy", "scipy", "highspy", "python"} <= set(versions)
    assert meta["store_format"] == str(STORE_FORMAT) and meta["root_seed"] == "424242"


FAULTY_SPEC = """
[campaign]
name = "{name}"
root_seed = 99
replicates = {replicates}

[[families]]
name = "test-faulty-lp"
sizes = [{{rows = 12, cols = 24}}]

[[families]]
name = "test-faulty-lp"
sizes = [{{rows = 14, cols = 28}}]
params = {{original = "segfault"}}

[sweep]
projectors = ["gaussian"]
k = [1, 2, 3, 4, 6]

[solver]
time_limit_s = 5
trial_timeout_s = 2
"""


def test_raise_segfault_and_hang_become_rows_and_the_rest_completes(tmp_path, fault_plugin):
    spec = load_spec(write_spec(tmp_path, "faulty", replicates=1, text=FAULTY_SPEC))
    summary = run_campaign(spec, tmp_path / "out", workers=2)
    with sqlite3.connect(summary.store_path) as db:
        rows = db.execute("SELECT i.params, t.k, t.status, t.message, t.metrics FROM trials t "
                          "JOIN instances i USING (instance_id) ORDER BY i.params, t.k").fetchall()
        originals = dict(db.execute("SELECT params, orig_status || ': ' || orig_message FROM instances").fetchall())
    healthy = [row for row in rows if '"original":"ok"' in row[0]]
    by_k = {k: (status, message, metrics) for _, k, status, message, metrics in healthy}
    assert by_k[1][0] == "error" and "RuntimeError: injected failure" in by_k[1][1]
    assert by_k[2][0] == "crashed" and "SIGSEGV" in by_k[2][1]
    assert by_k[3][0] == "timeout" and "trial_timeout_s = 2 s" in by_k[3][1]
    for k in (4, 6):
        assert by_k[k][0] == "ok" and json.loads(by_k[k][2])["proj_status"] in ("optimal", "unbounded", "infeasible")
    # the instance whose original solve crashed: stored once as an error, its trials still ran
    crashed_original = next(value for params, value in originals.items() if "segfault" in params)
    assert crashed_original.startswith("solver_failed: crashed: worker process killed by SIGSEGV")
    assert summary.ran == 10 and summary.statuses["ok"] == 4


def test_in_process_executor_records_a_raising_trial(tmp_path, fault_plugin):
    text = FAULTY_SPEC.replace("k = [1, 2, 3, 4, 6]", "k = [1, 4]").replace(
        '[[families]]\nname = "test-faulty-lp"\nsizes = [{{rows = 14, cols = 28}}]\nparams = {{original = "segfault"}}\n', "")
    summary = run_campaign(load_spec(write_spec(tmp_path, "faulty", replicates=1, text=text)), tmp_path / "out", inline=True)
    assert summary.statuses == {"error": 1, "ok": 1}


def test_dask_workers_survive_failing_trials(tmp_path, fault_plugin, cluster):
    import sys

    from distributed import Client

    spec = load_spec(write_spec(tmp_path, "faulty", replicates=1, text=FAULTY_SPEC))
    with Client(cluster.scheduler_address) as client:
        client.upload_file(sys.modules[fault_plugin].__file__)  # Dask's way to ship a module to workers
        workers = _workers(client)
        summary = run_campaign(spec, tmp_path / "out", scheduler=cluster.scheduler_address)
        assert _workers(client) == workers  # the sandboxes absorbed the segfaults
    assert summary.statuses == {"error": 2, "crashed": 2, "timeout": 2, "ok": 4}

