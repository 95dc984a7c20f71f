"""A worker process that runs one task at a time, killed from outside when it overruns.

The parent (the coordinator, or a Dask worker) starts the child with ``subprocess`` (so it also
works inside daemonic Dask worker processes), one solver thread (``OMP/OPENBLAS/MKL...=1`` set in
its environment before numpy loads; HiGHS runs with ``threads = 1``) and talks to it over its
stdin/stdout with length-prefixed pickles. The child's own stdout is redirected to its stderr,
which goes to a log file, so a solver banner cannot corrupt the protocol; on a crash the tail of
that log (``faulthandler``'s report of the failing frame) becomes part of the message.

The time limit is enforced from outside: when a task is still running at its deadline the parent
kills the child (SIGKILL) and starts a fresh one. A child that dies (segfault, abort, OOM kill) is
noticed by the end of its output pipe. A child whose parent dies exits by itself (EOF on stdin,
and a watchdog thread that notices the re-parenting), so a coordinator killed with ``kill -9``
leaves no orphans behind.

Each sandbox mirrors the originals its child holds (:class:`~calib.sweep.tasks.HeldOriginals`), so
an instance's original solve crosses the pipe once per child, with the first trial of that instance.
"""

from __future__ import annotations

import fcntl
import os
import pickle
import selectors
import signal
import struct
import subprocess
import sys
import tempfile
import time
from typing import Optional

from calib.sweep.tasks import Failure, HeldOriginals

#: environment variables that pin numerical libraries to one thread (read when they load)
SINGLE_THREAD_ENV = {name: "1" for name in (
    "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "VECLIB_MAXIMUM_THREADS",
    "NUMEXPR_NUM_THREADS", "BLIS_NUM_THREADS")}

#: seconds a new child may take to import numpy, scipy and HiGHS and report ready
STARTUP_TIMEOUT_S = 120.0

_HEADER = struct.Struct("<Q")


def _write_message(fd: int, value) -> None:
    data = pickle.dumps(value, protocol=pickle.HIGHEST_PROTOCOL)
    view = memoryview(_HEADER.pack(len(data)) + data)
    while view:
        view = view[os.write(fd, view):]


def _read_exactly(fd: int, size: int) -> Optional[bytes]:
    chunks, remaining = [], size
    while remaining:
        chunk = os.read(fd, min(remaining, 1 << 20))
        if not chunk:
            return None
        chunks.append(chunk)
        remaining -= len(chunk)
    return b"".join(chunks)


def _read_message(fd: int):
    """The next message on ``fd``; raises EOFError when the writer is gone."""
    header = _read_exactly(fd, _HEADER.size)
    body = None if header is None else _read_exactly(fd, _HEADER.unpack(header)[0])
    if body is None:
        raise EOFError("worker pipe closed")
    return pickle.loads(body)


# ----- child side ----------------------------------------------------------------------------
def child_main() -> None:
    """Entry point of the worker process: serve tasks from stdin until EOF or ``None``."""
    import faulthandler
    import threading

    protocol_out = os.dup(1)
    os.dup2(2, 1)  # anything printed by C code or Python lands in the log, not in the protocol
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the coordinator's to handle
    faulthandler.enable()
    parent = os.getppid()

    def watchdog() -> None:
        while os.getppid() == parent:
            time.sleep(1.0)
        os._exit(3)

    threading.Thread(target=watchdog, daemon=True).start()
    import calib.families  # noqa: F401  (load the numerical stack before "ready")
    import calib.metrics  # noqa: F401
    import calib.projectors  # noqa: F401
    import calib.reduce  # noqa: F401
    import calib.solvers.highs  # noqa: F401
    from calib.sweep.tasks import execute, worker_environment

    worker_environment()

    _write_message(protocol_out, ("ready", os.getpid()))
    while True:
        try:
            task = _read_message(0)
        except EOFError:
            break
        if task is None:
            break
        try:
            reply = ("done", execute(task))
        except BaseException as error:  # noqa: BLE001 - reported to the parent, never swallowed
            from calib.errors import describe_exception

            reply = ("raised", describe_exception(error))
        _write_message(protocol_out, reply)
    os._exit(0)


# ----- parent side ---------------------------------------------------------------------------
def _child_env() -> dict:
    paths = []
    for entry in sys.path:
        path = os.path.abspath(entry or os.getcwd())
        if path not in paths and os.path.isdir(path):
            paths.append(path)
    return {**os.environ, **SINGLE_THREAD_ENV, "PYTHONPATH": os.pathsep.join(paths)}


def _tail(log, limit: int = 400) -> str:
    """What the child last wrote to its log, on one line (empty when it wrote nothing).

    For a fatal signal, ``faulthandler``'s report is condensed to its first line and the two
    innermost frames of the crashing thread (it lists the most recent call first); otherwise the
    last three lines are kept.
    """
    try:
        log.flush()
        log.seek(0, os.SEEK_END)
        size = log.tell()
        log.seek(max(0, size - 16384))
        text = log.read().decode("utf-8", "replace")
    except OSError:
        return ""
    lines = [line.strip() for line in text.splitlines() if line.strip()]
    fatal = [index for index, line in enumerate(lines) if line.startswith("Fatal Python error")]
    if fatal:
        report = lines[fatal[-1]:]
        current = [index for index, line in enumerate(report) if line.startswith("Current thread")]
        frames = [line for line in report[current[0] if current else 0:] if line.startswith("File ")]
        lines = report[:1] + frames[:2]
    return " | ".join(lines[-3:])[-limit:]


def _death_message(returncode: Optional[int]) -> str:
    if returncode is not None and returncode < 0:
        try:
            name = signal.Signals(-returncode).name
        except ValueError:
            name = f"signal {-returncode}"
        return f"worker process killed by {name}"
    return f"worker process exited with code {returncode}"


class Sandbox:
    """One child worker process. States: "starting" (not ready yet), "idle", "busy"."""

    def __init__(self) -> None:
        self.log = tempfile.TemporaryFile(mode="w+b")
        # O_APPEND on the shared file description: after each truncation the child writes from 0 again
        fcntl.fcntl(self.log.fileno(), fcntl.F_SETFL, fcntl.fcntl(self.log.fileno(), fcntl.F_GETFL) | os.O_APPEND)
        self.process = subprocess.Popen(
            [sys.executable, "-c", "from calib.sweep.sandbox import child_main; child_main()"],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=self.log, env=_child_env(),
            close_fds=True, start_new_session=True)
        self.state = "starting"
        self.started = time.monotonic()
        self.deadline = self.started + STARTUP_TIMEOUT_S
        self.job: Optional[tuple] = None  # (token, timeout) of the running task
        self.held = HeldOriginals()  # what this child keeps; a renewed sandbox starts empty

    def fileno(self) -> int:
        return self.process.stdout.fileno()

    def send(self, token: str, task, timeout: Optional[float]) -> None:
        """Start ``task`` on this idle child; it must answer within ``timeout`` seconds."""
        self.log.truncate(0)
        self.job = (token, timeout)
        self.state = "busy"
        self.started = time.monotonic()
        self.deadline = float("inf") if timeout is None else self.started + timeout
        try:
            _write_message(self.process.stdin.fileno(), self.held.prepare(task))
        except OSError:
            pass  # the child is gone: its closed stdout reports the death to the reader

    def receive(self):
        """Read the child's answer after its pipe became readable.

        Returns the payload of a finished task, a :class:`Failure` ("crashed") when the child died,
        or ``None`` when a starting child reported ready.
        """
        try:
            kind, value = _read_message(self.fileno())
        except (EOFError, OSError, pickle.UnpicklingError):
            return self._died()
        if kind == "ready":
            self.state = "idle"
            return None
        self.state, self.job = "idle", None
        if kind == "raised":
            return Failure("error", f"worker raised outside the trial: {value}", time.monotonic() - self.started)
        return value

    def _died(self) -> Failure:
        seconds = time.monotonic() - self.started
        self.kill()
        tail = _tail(self.log)
        message = _death_message(self.process.returncode) + (" while starting" if self.job is None else "")
        return Failure("crashed", message + (f"; last output: {tail}" if tail else ""), seconds)

    def expire(self) -> Failure:
        """Kill a child past its deadline and describe it as a timeout."""
        seconds = time.monotonic() - self.started
        self.kill()
        if self.job is None:
            return Failure("crashed", f"worker did not start within {STARTUP_TIMEOUT_S:.0f} s; last output: {_tail(self.log)}", seconds)
        return Failure("timeout", f"no result within trial_timeout_s = {self.job[1]:g} s; worker killed", seconds)

    def kill(self) -> None:
        if self.process.poll() is None:
            self.process.kill()
        self.process.wait()
        self.state = "dead"
        for pipe in (self.process.stdin, self.process.stdout):
            try:
                pipe.close()
            except OSError:
                pass

    def renewed(self) -> "Sandbox":
        """This sandbox while its child lives, else a new one (this one's log is closed)."""
        if self.state != "dead":
            return self
        self.close()
        return Sandbox()

    def close(self) -> None:
        """Ask an idle child to stop, then make sure it is gone."""
        if self.process.poll() is None and self.state == "idle":
            try:
                _write_message(self.process.stdin.fileno(), None)
                self.process.wait(timeout=2.0)
            except (OSError, subprocess.TimeoutExpired):
                pass
        self.kill()
        self.log.close()

    def wait(self, until: float) -> bool:
        """Block until the child's pipe is readable or the monotonic time ``until``; True if readable."""
        with selectors.DefaultSelector() as selector:
            selector.register(self.fileno(), selectors.EVENT_READ)
            return bool(selector.select(max(0.0, until - time.monotonic())))

    def wait_ready(self) -> Optional[Failure]:
        """Block until a starting child is ready; a :class:`Failure` when it died or hung instead."""
        while self.state == "starting":
            if not self.wait(self.deadline):
                return self.expire()
            answer = self.receive()
            if isinstance(answer, Failure):
                return answer
        return None

    def run(self, token: str, task, timeout: Optional[float]):
        """Run one task synchronously: its payload or a :class:`Failure` (the child is then dead)."""
        failure = self.wait_ready()
        if failure is not None:
            return failure
        self.send(token, task, timeout)
        if not self.wait(self.deadline):
            return self.expire()
        return self.receive()
