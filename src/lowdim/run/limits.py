"""Run one function in a child process under a time limit and a memory limit.

Why a child process: a method can hang inside compiled code (an eigensolver that never
converges, a BLAS call on a huge matrix) where no Python-level timer can interrupt it. Only
another process can stop it, with SIGKILL. Each job therefore runs in a fresh child; its parent
(a joblib worker, or the driver itself with ``--jobs 1``) waits for the result and kills the
child when a limit is passed.

How the limits work:

- Time: the parent polls the child's pipe until ``timeout`` seconds of wall-clock time have
  passed, then kills the child (status ``timeout``).
- Memory, two guards. (1) The parent reads the child's resident set size with psutil every
  50 ms and kills the child once it passes ``memory_limit`` (status ``memory``); this is the
  limit a user means, resident memory. (2) The child caps its own address space with
  ``setrlimit(RLIMIT_AS)`` at its address space at start plus ``memory_limit``, so an
  allocation too large to be caught between two polls fails at once with a ``MemoryError``
  (also status ``memory``) instead of driving the machine into swap.
- Orphans: the child asks the kernel (``prctl(PR_SET_PDEATHSIG)``) to be killed when the process
  that forked it dies; a child of the fork server (whose parent is the server, not the waiting
  process) also runs a thread that exits when the waiting process is gone. The waiting parent
  kills the child and stops when the driver that owns the run dies, so killing a run with
  SIGKILL leaves no job running on.

How children are made: a parent with a single thread (a loky worker) forks the child
directly, which is cheapest since the child inherits every imported module. A parent that runs
threads (a dask worker, the driver with tqdm's monitor thread) must not fork, since a lock held
by another thread would stay locked in the child for ever; it uses a ``forkserver`` instead, a
clean single-threaded process that imports numpy, scikit-learn and lowdim once and then forks
one child per job.
"""

from __future__ import annotations

import ctypes
import functools
import importlib
import multiprocessing as mp
import os
import resource
import signal
import threading
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import psutil

__all__ = ["Outcome", "run_limited", "START_METHOD", "PRELOAD"]

# "auto": fork from a single-threaded parent, the fork server otherwise; "fork" and "forkserver"
# force one (in-process tests use "fork" to hand fakes to the child).
START_METHOD = "auto"
PRELOAD = [
    "numpy",
    "sklearn.neighbors",
    "lowdim.methods.linear",
    "lowdim.methods.kernel_pca",
    "lowdim.methods.laplacian",
    "lowdim.methods.diffusion",
    "scipy.sparse",
    "sklearn.base",
    "lowdim.run.worker",
    "lowdim.datasets",
    "lowdim.metrics",
]
_POLL = 0.05
_READY = "ready"
_START_GRACE = 300.0
_PR_SET_PDEATHSIG = 1


@dataclass(frozen=True)
class Outcome:
    """What became of a limited call: ``status`` is ok, failed, timeout or memory."""

    status: str
    value: Any = None
    error: str | None = None
    seconds: float = 0.0
    peak_rss_mb: float = 0.0
    traceback: str | None = None
    abandoned: bool = False


def _die_with_parent() -> None:
    try:
        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
    except OSError:  # not Linux: the waiting parent's own checks still apply
        pass


def _cap_address_space(memory_limit: int | None) -> None:
    if memory_limit is None:
        return
    current = psutil.Process().memory_info().vms
    cap = current + memory_limit
    _, hard = resource.getrlimit(resource.RLIMIT_AS)
    if hard != resource.RLIM_INFINITY:
        cap = min(cap, hard)
    resource.setrlimit(resource.RLIMIT_AS, (cap, hard))


def _watch_waiter(waiter: int) -> None:
    """Exit when the waiting parent dies (a fork server's child outlives it otherwise)."""

    def watch() -> None:
        while _alive(waiter):
            time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=watch, name="lowdim-waiter-watch", daemon=True).start()


def _child(conn: Any, fn: Callable, args: tuple, memory_limit: int | None, waiter: int) -> None:
    _die_with_parent()
    if os.getppid() != waiter:
        _watch_waiter(waiter)
    conn.send(_READY)
    try:
        _cap_address_space(memory_limit)
        message = ("ok", fn(*args))
    except MemoryError as exc:
        detail = f"MemoryError: {exc}" if str(exc) else "MemoryError"
        limit = (
            "" if memory_limit is None else f" under the limit of {memory_limit / 2**20:.0f} MB"
        )
        message = ("memory", f"ran out of memory{limit} ({detail})")
    except BaseException as exc:
        text = " ".join(str(exc).split())
        message = ("failed", f"{type(exc).__name__}: {text}" if text else type(exc).__name__)
        message = (*message, traceback.format_exc())
    try:
        conn.send(message)
    except MemoryError:
        conn.send(("memory", "MemoryError while returning the result"))
    conn.close()


def _alive(pid: int | None) -> bool:
    if pid is None:
        return True
    try:
        return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
    except psutil.Error:
        return False


def _context() -> Any:
    method = START_METHOD
    if method == "auto":
        method = "fork" if threading.active_count() == 1 else "forkserver"
    ctx = mp.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(PRELOAD)
    else:
        _preload()
    return ctx


@functools.cache
def _preload() -> None:
    # Imported once in the parent, so that each forked child starts with them loaded instead
    # of importing them again within its time limit.
    for name in PRELOAD:
        try:
            importlib.import_module(name)
        except ImportError:
            pass


def run_limited(
    fn: Callable,
    args: tuple,
    *,
    timeout: float | None,
    memory_limit: int | None,
    watch_pid: int | None = None,
) -> Outcome:
    """Call ``fn(*args)`` in a child process; stop it at ``timeout`` s or ``memory_limit`` bytes.

    ``fn`` must be importable by name (a module-level function) and its result picklable.
    ``watch_pid``: stop waiting, and kill the child, when this process (the run's driver) dies.
    A raised exception becomes status ``failed`` with ``"Type: message"``; a child that dies
    without answering (a crash in compiled code) is ``failed`` with the signal that killed it.
    """
    ctx = _context()
    receive, send = ctx.Pipe(duplex=False)
    proc = ctx.Process(
        target=_child, args=(send, fn, args, memory_limit, os.getpid()), daemon=True
    )
    proc.start()
    send.close()
    watched = psutil.Process(proc.pid)
    peak = 0
    # The clock starts when the child is running, so that starting the fork server (once per
    # worker, seconds on a busy machine) is not charged to the first job.
    start = time.monotonic()
    ready = False
    try:
        while True:
            if receive.poll(_POLL):
                try:
                    message = receive.recv()
                except EOFError:
                    message = None
                if message == _READY and not ready:
                    ready = True
                    start = time.monotonic()
                    continue
                break
            if not proc.is_alive():
                message = receive.recv() if receive.poll(0) else None
                break
            try:
                rss = watched.memory_info().rss
            except psutil.Error:
                rss = 0
            peak = max(peak, rss)
            elapsed = time.monotonic() - start
            if memory_limit is not None and rss > memory_limit:
                return Outcome(
                    "memory",
                    error=f"stopped when its resident memory reached {rss / 2**20:.0f} MB, over "
                    f"the limit of {memory_limit / 2**20:.0f} MB",
                    seconds=elapsed,
                    peak_rss_mb=peak / 2**20,
                )
            if not ready and elapsed > _START_GRACE:
                return Outcome(
                    "failed",
                    error=f"the job's process did not start within {_START_GRACE:g} s",
                    seconds=elapsed,
                )
            if timeout is not None and elapsed > timeout and ready:
                return Outcome(
                    "timeout",
                    error=f"stopped after the time limit of {timeout:g} s",
                    seconds=elapsed,
                    peak_rss_mb=peak / 2**20,
                )
            if not _alive(watch_pid):
                return Outcome(
                    "failed", error="abandoned: the run's driver process died", abandoned=True
                )
    finally:
        if proc.is_alive():
            proc.kill()
        proc.join()
        receive.close()
    elapsed = time.monotonic() - start
    if message is None:
        code = proc.exitcode
        how = (
            f"signal {signal.Signals(-code).name}"
            if code is not None and code < 0
            else f"exit status {code}"
        )
        return Outcome(
            "failed",
            error=f"the job's process died with {how} before returning a result",
            seconds=elapsed,
            peak_rss_mb=peak / 2**20,
        )
    status, value = message[0], message[1]
    if status == "ok":
        return Outcome("ok", value=value, seconds=elapsed, peak_rss_mb=peak / 2**20)
    detail = message[2] if len(message) > 2 else None
    return Outcome(
        status, error=value, seconds=elapsed, peak_rss_mb=peak / 2**20, traceback=detail
    )


def available_cores() -> int:
    """Cores this process may run on (the affinity mask, not the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:
        return max(1, os.cpu_count() or 1)
