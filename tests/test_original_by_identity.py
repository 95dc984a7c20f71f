"""A trial task refers to its instance's original solve by identity after the first per worker.

The property checked: every worker process receives an instance's original solve (its ``orig_x``)
once, with the first trial of that instance it runs; the sender's mirror of the worker's cache and
the worker's cache follow the same LRU rule, so a task sent without its original always finds it.
That the numbers do not change is checked by the executor tests (pool and Dask tables byte for byte
equal to the serial run's).
"""

from __future__ import annotations

import pickle
from collections import defaultdict

import numpy as np
from engine_helpers import write_spec

from calib.sweep import sandbox, tasks
from calib.sweep.runner import run_campaign
from calib.sweep.spec import load_spec
from calib.sweep.tasks import HeldOriginals, ORIGINAL_CACHE_SIZE, TrialTask, remember_original
from calib.trial import InstanceRef, ProjectorChoice, Trial


def _task(instance: int, x_size: int = 1000) -> TrialTask:
    ref = InstanceRef("lp-planted", {"rows": 20, "cols": 40}, instance, 7)
    original = {"orig_x": np.full(x_size, float(instance))}
    return TrialTask(Trial(ref, ProjectorChoice("gaussian"), 4, 0, "4"), ("basis-lstsq",), {}, original)


def test_mirror_and_worker_cache_agree_on_any_order(monkeypatch):
    """The worker never misses an original it was sent without, however instances interleave."""
    monkeypatch.setattr(tasks, "_originals", tasks.OrderedDict())
    held = HeldOriginals()
    rng = np.random.default_rng(11)
    sent_with_x = 0
    for instance in rng.integers(0, 2 * ORIGINAL_CACHE_SIZE, size=400):
        task = held.prepare(_task(int(instance)))
        sent_with_x += task.original is not None
        assert remember_original(task)["orig_x"][0] == instance  # the right instance's original
    assert 2 * ORIGINAL_CACHE_SIZE <= sent_with_x < 400  # each instance at least once, most tasks without


def test_a_task_without_its_original_is_much_smaller_when_pickled():
    full, bare = _task(1, x_size=100_000), _task(1, x_size=100_000).without_original()
    assert len(pickle.dumps(full)) > 800_000 > 100 * len(pickle.dumps(bare))  # 10^5 doubles = 800 kB


def test_the_pool_sends_each_original_once_per_worker(tmp_path, monkeypatch):
    """Record every message the coordinator writes to a worker during a 2-worker campaign."""
    sent = defaultdict(list)  # worker pipe -> tasks in the order written
    write = sandbox._write_message

    def recording(fd, value):
        if isinstance(value, TrialTask):
            sent[fd].append(value)
        write(fd, value)

    monkeypatch.setattr(sandbox, "_write_message", recording)
    summary = run_campaign(load_spec(write_spec(tmp_path)), tmp_path / "out", workers=2)
    assert summary.statuses == {"ok": 120}
    assert sum(map(len, sent.values())) == 120
    carried = 0
    for stream in sent.values():
        recent: list = []  # the worker's cache: the last ORIGINAL_CACHE_SIZE distinct instances
        for task in stream:
            assert (task.original is not None) == (task.instance_id not in recent)
            carried += task.original is not None
            recent = ([task.instance_id] + [key for key in recent if key != task.instance_id])[:ORIGINAL_CACHE_SIZE]
    assert carried <= 2 * 6  # at most once per (worker, instance) here: trials run in instance order


def test_dask_sends_each_original_to_the_cluster_once():
    """With a stand-in client: the first trial of an instance submits its original as a task of its
    own; every trial task is submitted without it and depends on that task's future."""
    from collections import OrderedDict

    from calib.sweep import executors

    class Future:
        def __init__(self, key):
            self.key = key

    class Client:
        def __init__(self):
            self.calls = []

        def submit(self, function, *args, **options):
            self.calls.append((function, args))
            return Future(f"f{len(self.calls)}")

    dask = executors.DaskExecutor.__new__(executors.DaskExecutor)
    dask.client, dask._originals, dask._tokens = Client(), OrderedDict(), {}
    dask._completed = set()
    for instance in (1, 1, 2, 1, 2):
        task = _task(instance)
        dask.submit(task.token, task, 10.0)
    held = [args for function, args in dask.client.calls if function is executors._held]
    trials = [args for function, args in dask.client.calls if function is executors.run_in_sandbox]
    assert [args[0]["orig_x"][0] for args in held] == [1.0, 2.0]
    assert len(trials) == 5 and all(args[0].original is None for args in trials)
    assert len({args[2].key for args in trials}) == 2  # one original future per instance
