"""Executors: where tasks run. The coordinator submits tasks and reads finished ones, one at a time.

- :class:`InlineExecutor`: in the coordinating process, one after the other (debugging,
  profiling; no external time limit, a crash ends the run).
- :class:`LocalPool` (default): N worker processes (:class:`~calib.sweep.sandbox.Sandbox`), each
  with one solver thread; a task past ``trial_timeout_s`` gets its worker killed and replaced, a
  worker that dies becomes a "crashed" result.
- :class:`DaskExecutor`: an existing Dask scheduler; every Dask worker thread runs tasks in its own
  sandbox, so time limits and crashes behave as in the local pool. Results stream back in
  completion order; lost Dask workers are handled by Dask's rescheduling (tasks are idempotent).
  An instance's original solve goes to the cluster once, as a small task of its own that returns it
  (recomputed, like any task, if the worker holding it dies); trial tasks depend on its future.

All three return ``Done(token, result)`` where ``result`` is the payload of
:func:`calib.sweep.tasks.execute` or a :class:`~calib.sweep.tasks.Failure`.
"""

from __future__ import annotations

import os
import re
import selectors
import sys
import threading
import time
from collections import OrderedDict, deque
from dataclasses import dataclass
from typing import Optional, Union

from calib.errors import InputError
from calib.sweep.tasks import Failure, Task, TrialTask, execute


@dataclass
class Done:
    token: str
    result: Union[dict, Failure]


def default_workers() -> int:
    """The number of cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


class InlineExecutor:
    """Run each task in this process when its result is asked for."""

    name = "in-process"
    slots = 1

    def __init__(self) -> None:
        self._queue: deque = deque()

    def submit(self, token: str, task: Task, timeout: Optional[float]) -> None:
        self._queue.append((token, task))

    def next_done(self) -> Done:
        token, task = self._queue.popleft()
        return Done(token, execute(task))

    def close(self) -> None:
        self._queue.clear()


#: worker states that wait on the worker's pipe (and have a deadline)
_ACTIVE = ("busy", "starting")


class LocalPool:
    """``workers`` sandboxed processes fed from one queue; keeps two tasks per worker submitted."""

    name = "local pool"

    def __init__(self, workers: int):
        from calib.sweep.sandbox import Sandbox

        self._new = Sandbox
        self.workers = workers
        self.slots = 2 * workers
        self._pending: deque = deque()
        self._boxes: list = []  # started with the first task, so a run with nothing to do starts none

    def submit(self, token: str, task: Task, timeout: Optional[float]) -> None:
        if not self._boxes:
            self._boxes = [self._new() for _ in range(self.workers)]
        self._pending.append((token, task, timeout))
        self._dispatch()

    def _dispatch(self) -> None:
        for index, box in enumerate(self._boxes):
            if not self._pending:
                return
            if box.state == "idle" and box.process.poll() is not None:
                # died while idle (the OOM killer, a stray kill): replace it rather than pin the next
                # task's row on a death that task did not cause; the new worker takes work once ready
                box.kill()
                self._boxes[index] = box.renewed()
                continue
            if box.state == "idle":
                box.send(*self._pending.popleft())

    def next_done(self) -> Done:
        """Block until a task finishes, times out or crashes its worker."""
        while True:
            done = self._expire_overdue() or self._read_one()
            if done is not None:
                return done

    def _expire_overdue(self) -> Optional[Done]:
        now = time.monotonic()
        for box in self._boxes:
            if box.state in _ACTIVE and box.deadline <= now:
                token = box.job[0] if box.job else None
                return self._settle(box, token, box.expire())
        return None

    def _read_one(self) -> Optional[Done]:
        waiting = [box for box in self._boxes if box.state in _ACTIVE]
        if not waiting:
            raise RuntimeError("next_done() with no task submitted")
        with selectors.DefaultSelector() as selector:
            for box in waiting:
                selector.register(box.fileno(), selectors.EVENT_READ, box)
            ready = selector.select(max(0.0, min(box.deadline for box in waiting) - time.monotonic()))
        for key, _ in ready:
            box = key.data
            token = box.job[0] if box.job else None
            done = self._settle(box, token, box.receive())
            if done is not None:
                return done
        return None

    def _settle(self, box, token: Optional[str], result) -> Optional[Done]:
        """Replace a dead worker, keep the others busy, and turn a task's result into ``Done``.

        ``token`` is None for a starting worker: its "ready" gives None, its death stops the run.
        """
        if box.state == "dead":
            self._boxes[self._boxes.index(box)] = box.renewed()
            if token is None:
                raise _start_failure(result)
        self._dispatch()
        return None if token is None else Done(token, result)

    def close(self) -> None:
        self._pending.clear()
        for box in self._boxes:
            box.close()


def _start_failure(failure: Failure) -> InputError:
    return InputError("worker process", f"could not start: {failure.message}",
                      f"check that `{sys.executable} -c 'import calib.sweep.tasks'` works")


_local = threading.local()


def run_in_sandbox(task: Task, timeout: Optional[float], original: Optional[dict] = None):
    """Run ``task`` in this thread's sandbox (started on first use); used by Dask workers.

    ``original`` is the trial's original solve when the task was shipped without it."""
    from dataclasses import replace

    from calib.sweep.sandbox import Sandbox

    if original is not None:
        task = replace(task, original=original)

    box = getattr(_local, "sandbox", None)
    box = _local.sandbox = Sandbox() if box is None else box.renewed()
    return box.run(task.token, task, timeout)


_ADDRESS = re.compile(r"(?:(?:tcp|tls)://)?(?P<host>\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9_.-]+):(?P<port>[0-9]{1,5})")


def check_scheduler_address(address: str) -> str:
    """``address`` if it reads ``tcp://HOST:PORT`` (or ``tls://``, or plain ``HOST:PORT``).

    >>> check_scheduler_address("tcp://10.0.0.5:8786")
    'tcp://10.0.0.5:8786'
    """
    match = _ADDRESS.fullmatch(address)
    if not match or not 1 <= int(match["port"]) <= 65535:
        raise InputError("--scheduler", f"{address!r} is not a scheduler address", "write tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786")
    return address


#: originals the Dask coordinator keeps on the cluster for trials still to submit
DASK_ORIGINALS = 16


def _held(original: dict) -> dict:
    """A Dask task that returns the original solve it was given (its cluster-side copy)."""
    return original


class DaskExecutor:
    """Tasks on an existing Dask scheduler; the coordinator alone writes the store."""

    name = "dask"

    def __init__(self, address: str, connect_timeout_s: float = 20.0):
        check_scheduler_address(address)
        try:
            from distributed import Client, as_completed
        except ImportError:
            raise InputError("--scheduler", "Dask distributed is not installed",
                             "install it with `pip install 'calib[dist]'`") from None
        try:
            self.client = Client(address, timeout=connect_timeout_s, set_as_default=False)
        except (OSError, TimeoutError) as error:
            raise InputError("--scheduler", f"cannot reach the Dask scheduler at {address}: {error}",
                             "start one with `dask scheduler` and workers with `dask worker ADDRESS --nthreads 1`") from None
        self._completed = as_completed(loop=self.client.loop)
        self._tokens: dict = {}  # future key -> (token, future)
        self._slots_checked = 0.0
        self._slots = 4
        self._originals: OrderedDict = OrderedDict()  # instance id -> future of its original

    @property
    def slots(self) -> int:
        """Tasks to keep submitted: two per Dask worker thread (re-read every few seconds)."""
        now = time.monotonic()
        if now - self._slots_checked > 5.0:
            threads = sum(self.client.nthreads().values())
            self._slots = max(4, 2 * threads)
            self._slots_checked = now
        return self._slots

    def submit(self, token: str, task: Task, timeout: Optional[float]) -> None:
        extra = ()
        if isinstance(task, TrialTask) and task.original is not None:
            extra, task = (self._original_future(task),), task.without_original()
        future = self.client.submit(run_in_sandbox, task, timeout, *extra, key=f"calib-{token}", pure=False, retries=2)
        self._tokens[future.key] = (token, future)
        self._completed.add(future)

    def _original_future(self, task: TrialTask):
        """The cluster's copy of ``task``'s original (sent with the first trial of its instance).

        The coordinator keeps the futures of the last :data:`DASK_ORIGINALS` instances; an older one
        is freed once the trials that depend on it are done."""
        key = task.instance_id
        future = self._originals.pop(key, None)
        if future is None:
            future = self.client.submit(_held, task.original, pure=False, retries=2)
        self._originals[key] = future
        while len(self._originals) > DASK_ORIGINALS:
            self._originals.popitem(last=False)
        return future

    def next_done(self) -> Done:
        from distributed import KilledWorker

        future = next(self._completed)
        token, _ = self._tokens.pop(future.key)
        try:
            result = future.result()
        except KilledWorker as error:
            result = Failure("crashed", f"Dask gave up after its workers died running this task: {error}")
        except Exception as error:  # noqa: BLE001 - the scheduler or network failed, not the trial
            result = Failure("lost", f"{type(error).__name__}: {error}")
        future.release()
        return Done(token, result)

    def close(self) -> None:
        for _, future in self._tokens.values():
            future.cancel()
        self._tokens.clear()
        self._originals.clear()
        self.client.close()
