"""A job host: a clean interpreter, started with :mod:`subprocess`, that forks limited jobs.

A process that runs threads must not fork (a lock held by another thread stays locked in the
child), and a daemonic process, which is what every dask worker is, may not start
multiprocessing children at all. Such a process calls :func:`call_in_host`: it starts
``python -m lowdim.run.jobhost`` once per calling thread, writes each job to the host's stdin
and reads the outcome back from its stdout. The host is single-threaded and no daemon; it
imports numpy, scikit-learn and lowdim once, then runs each job with
:func:`lowdim.run.limits.run_limited` in a forked child, under the same time and memory limits
and with the same process-group kill as everywhere else.

Frames on the pipes are an 8-byte length followed by a pickle. The host receives the caller's
``sys.path`` when started, so whatever the caller can import (a plugin, a test module) the host
can too. It ends when its caller closes the pipe, when the thread that started it exits
(``PR_SET_PDEATHSIG``), or after :data:`IDLE_SECONDS` without a job.
"""

from __future__ import annotations

import atexit
import contextlib
import os
import pickle
import select
import struct
import subprocess
import sys
import threading
from collections.abc import Callable
from typing import Any, BinaryIO

from lowdim.run import limits

__all__ = ["call_in_host", "IDLE_SECONDS"]

IDLE_SECONDS = 300.0
_HEADER = struct.Struct("<Q")
_local = threading.local()
_started: list[subprocess.Popen] = []


def _write(fh: BinaryIO, obj: Any) -> None:
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    fh.write(_HEADER.pack(len(data)))
    fh.write(data)
    fh.flush()


def _read(fh: BinaryIO) -> Any:
    head = fh.read(_HEADER.size)
    if len(head) < _HEADER.size:
        raise EOFError("the job host closed its pipe")
    (size,) = _HEADER.unpack(head)
    data = fh.read(size)
    if len(data) < size:
        raise EOFError("the job host closed its pipe")
    return pickle.loads(data)


def _start_host() -> subprocess.Popen:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in sys.path if p)
    proc = subprocess.Popen(
        [sys.executable, "-m", "lowdim.run.jobhost", str(os.getpid())],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        env=env,
        close_fds=True,
    )
    _started.append(proc)
    if _read(proc.stdout) != "ready":
        raise RuntimeError("the job host did not start")
    return proc


@atexit.register
def _close_hosts() -> None:
    """Close every host this process started (each ends when its pipe closes)."""
    for proc in _started:
        if proc.poll() is None:
            for fh in (proc.stdin, proc.stdout):
                with contextlib.suppress(OSError):
                    fh.close()
            try:
                proc.wait(timeout=5)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()


def _host() -> subprocess.Popen:
    proc = getattr(_local, "proc", None)
    if proc is None or proc.poll() is not None:
        proc = _local.proc = _start_host()
    return proc


def _forget(proc: subprocess.Popen) -> None:
    _local.proc = None
    with contextlib.suppress(ValueError):
        _started.remove(proc)
    proc.kill()
    proc.wait()
    for fh in (proc.stdin, proc.stdout):
        fh.close()


def call_in_host(
    fn: Callable,
    args: tuple,
    *,
    timeout: float | None,
    memory_limit: int | None,
    watch_pid: int | None = None,
) -> limits.Outcome:
    """:func:`lowdim.run.limits.run_limited` through this thread's job host."""
    request = (fn, args, timeout, memory_limit, watch_pid)
    for attempt in (1, 2):
        try:
            proc = _host()
        except (OSError, EOFError, RuntimeError) as exc:
            return limits.Outcome("failed", error=f"the job host could not start: {exc}")
        try:
            _write(proc.stdin, request)
        except (BrokenPipeError, OSError):
            # A host that ended while idle is started again; the job has not begun.
            _forget(proc)
            if attempt == 2:
                return limits.Outcome("failed", error="the job host closed its pipe")
            continue
        try:
            return _read(proc.stdout)
        except (EOFError, OSError, pickle.UnpicklingError) as exc:
            code = proc.poll()
            _forget(proc)
            return limits.Outcome(
                "failed", error=f"the job host died during the job (exit status {code}): {exc}"
            )
    raise AssertionError("unreachable")


def _serve(caller: int) -> int:
    limits.die_with_parent()
    if os.getppid() != caller:
        return 1
    # The channel moves off fds 0 and 1, so that nothing a job prints can corrupt it.
    inbox = os.fdopen(os.dup(0), "rb")
    outbox = os.fdopen(os.dup(1), "wb")
    limits.CLOSE_IN_CHILD.extend([inbox.fileno(), outbox.fileno()])
    null = os.open(os.devnull, os.O_RDWR)
    os.dup2(null, 0)
    os.dup2(2, 1)
    os.close(null)
    limits.START_METHOD = "fork"
    limits.preload()
    _write(outbox, "ready")
    while True:
        ready, _, _ = select.select([inbox], [], [], IDLE_SECONDS)
        if not ready:
            return 0
        try:
            fn, args, timeout, memory_limit, watch_pid = _read(inbox)
        except EOFError:
            return 0
        except Exception as exc:  # a job naming code this interpreter cannot import
            outcome = limits.Outcome(
                "failed", error=f"the job could not be read: {type(exc).__name__}: {exc}"
            )
        else:
            outcome = limits.run_limited(
                fn, args, timeout=timeout, memory_limit=memory_limit, watch_pid=watch_pid
            )
        try:
            _write(outbox, outcome)
        except BrokenPipeError:
            return 0


if __name__ == "__main__":
    sys.exit(_serve(int(sys.argv[1])))
