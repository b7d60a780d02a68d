"""Run one function in a child process under a time limit and a memory limit.

Why a child process: a method can hang inside compiled code (an eigensolver that never
converges, a BLAS call on a huge matrix) where no Python-level timer can interrupt it. Only
another process can stop it, with SIGKILL. Each job therefore runs in a fresh child; its parent
waits for the result and kills the child when a limit is passed.

How the limits work:

- Time: the parent polls the child's pipe until ``timeout`` seconds of wall-clock time have
  passed since the child was ready, then kills it (status ``timeout``).
- Memory means what the job's work adds on top of a job process at rest. The child reports
  ready once it runs (a forked process already holds the interpreter, numpy, scikit-learn and
  lowdim: about 120 MB resident); that resident size is the baseline. (1) The parent reads the
  child's resident set size every 50 ms and kills it once it exceeds the baseline by more than
  ``memory_limit`` (status ``memory``). (2) The child caps its own address space with
  ``setrlimit(RLIMIT_AS)`` at its address space when ready plus ``memory_limit`` plus
  :data:`ADDRESS_HEADROOM` (native libraries reserve address space they never touch: thread
  stacks, malloc arenas, BLAS buffers), so one allocation far too large to be caught between
  two polls fails at once instead of driving the machine into swap. A failed allocation is
  status ``memory`` whether Python raises ``MemoryError`` or a native library gives up and ends
  the process (its last words on stderr, e.g. OpenBLAS's "Memory allocation still failed",
  tell which).
- Process group: the child leads a process group of its own, and the parent ends the whole
  group (SIGKILL) when the job ends, however it ends; so no process that a method starts (its
  own subprocesses, forked helpers) outlives its job, unless it deliberately leaves the group.
- Orphans: the child asks the kernel (``prctl(PR_SET_PDEATHSIG)``) to be killed when the
  process that forked it dies, and the waiting parent stops when the driver that owns the run
  dies (``watch_pid``), so killing a run with SIGKILL leaves no job running on.

How children are made: a parent with a single thread that is not a daemon (a loky worker)
forks the child directly, which is cheapest since the child inherits every imported module.
A parent that runs threads (a dask worker, the driver with tqdm's monitor thread) must not
fork, since a lock held by another thread would stay locked in the child for ever, and a
daemonic process (every dask worker process) may not have multiprocessing children at all. Such
a parent hands the job to a *job host* (:mod:`lowdim.run.jobhost`): a clean single-threaded
interpreter started with :mod:`subprocess`, which imports numpy, scikit-learn and lowdim once
and then forks one limited child per job, exactly as above.
"""

from __future__ import annotations

import contextlib
import ctypes
import functools
import importlib
import multiprocessing as mp
import os
import re
import resource
import signal
import tempfile
import threading
import time
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import psutil

__all__ = [
    "Outcome",
    "run_limited",
    "lift_memory_limit",
    "tell_parent",
    "START_METHOD",
    "PRELOAD",
    "ADDRESS_HEADROOM",
]

# "auto": fork from a single-threaded, non-daemonic parent, else go through a job host;
# "fork" and "host" force one (in-process tests use "fork" to hand fakes to the child).
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
    "sklearn.decomposition",
    "lowdim.run.worker",
    "lowdim.datasets",
    "lowdim.metrics",
]
# Address space a job may reserve beyond its memory limit before an allocation fails outright.
ADDRESS_HEADROOM = 2**30
_POLL = 0.05
_READY = "ready"
_LIFTED = "lifted"
_FACTS = "facts"
_START_GRACE = 300.0
_PR_SET_PDEATHSIG = 1
_STDERR_TAIL = 4096
# What native libraries print when an allocation fails (OpenBLAS, glibc, C++ runtimes, Fortran).
_ALLOCATION_FAILED = re.compile(
    r"memory allocation|allocation (still )?failed|cannot allocate memory|out of memory|"
    r"bad_alloc|MemoryError|insufficient (virtual )?memory|failed to allocate|mmap failed",
    re.IGNORECASE,
)
# File descriptors the child must not keep (a job host's channel to its caller).
CLOSE_IN_CHILD: list[int] = []
# In a limited child: the pipe to the waiting parent (None elsewhere).
_to_parent: Any = None


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
    facts: dict = field(default_factory=dict)


def die_with_parent() -> None:
    """Ask the kernel to SIGKILL this process when the thread that started it exits (Linux)."""
    try:
        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
    except OSError:  # not Linux: the waiting parent's own checks still apply
        pass


def lift_memory_limit() -> None:
    """Called by a limited child once the work the limit is for is done; no-op elsewhere.

    The parent stops watching the memory and the address-space cap goes back to the hard
    limit, so that the bounded work that follows (scoring, in blocks) is not counted.
    """
    if _to_parent is None:
        return
    _to_parent.send(_LIFTED)
    _, hard = resource.getrlimit(resource.RLIMIT_AS)
    resource.setrlimit(resource.RLIMIT_AS, (hard, hard))


def tell_parent(**facts: Any) -> None:
    """Called by a limited child to pass facts (e.g. the data's shape) to the parent early.

    They reach the :class:`Outcome` however the child ends, even when it is killed at a limit
    later on. A no-op outside a limited child.
    """
    if _to_parent is not None:
        _to_parent.send((_FACTS, facts))


def _private_resident(proc: psutil.Process) -> int:
    """Anonymous resident memory (``RssAnon``), else the resident set size.

    Anonymous memory is what the process allocated; unlike the resident set size it leaves out
    the pages of shared libraries that a forked child maps in as it first runs their code.
    """
    try:
        with open(f"/proc/{proc.pid}/status", "rb") as fh:
            for line in fh:
                if line.startswith(b"RssAnon:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return proc.memory_info().rss


def _cap_address_space(memory_limit: int | None) -> None:
    if memory_limit is None:
        return
    current = psutil.Process().memory_info().vms
    cap = current + memory_limit + ADDRESS_HEADROOM
    _, hard = resource.getrlimit(resource.RLIMIT_AS)
    if hard != resource.RLIM_INFINITY:
        cap = min(cap, hard)
    resource.setrlimit(resource.RLIMIT_AS, (cap, hard))


def _quiet_standard_streams(stderr_fd: int) -> None:
    """Point stdin at /dev/null and stdout, stderr at the parent's capture file."""
    for fd in CLOSE_IN_CHILD:
        with contextlib.suppress(OSError):
            os.close(fd)
    null = os.open(os.devnull, os.O_RDONLY)
    os.dup2(null, 0)
    os.close(null)
    os.dup2(stderr_fd, 1)
    os.dup2(stderr_fd, 2)


def _child(conn: Any, fn: Callable, args: tuple, memory_limit: int | None, err: int) -> None:
    global _to_parent
    # A group of its own, so that the parent's kill reaches every process the job starts.
    with contextlib.suppress(OSError):
        os.setpgid(0, 0)
    die_with_parent()
    _quiet_standard_streams(err)
    try:
        _cap_address_space(memory_limit)
    except (OSError, ValueError):
        pass
    conn.send(_READY)
    _to_parent = conn
    try:
        message = ("ok", fn(*args))
    except MemoryError as exc:
        detail = f"MemoryError: {exc}" if str(exc) else "MemoryError"
        message = ("memory", f"ran out of memory{_limit_text(memory_limit)} ({detail})")
    except BaseException as exc:
        text = " ".join(str(exc).split())
        message = ("failed", f"{type(exc).__name__}: {text}" if text else type(exc).__name__)
        message = (*message, traceback.format_exc())
    try:
        conn.send(message)
    except MemoryError:
        conn.send(("memory", "MemoryError while returning the result"))
    conn.close()


def _limit_text(memory_limit: int | None) -> str:
    if memory_limit is None:
        return ""
    return f" under the limit of {memory_limit / 2**20:.0f} MB"


def _alive(pid: int | None) -> bool:
    if pid is None:
        return True
    try:
        return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
    except psutil.Error:
        return False


def _use_host() -> bool:
    if START_METHOD != "auto":
        return START_METHOD == "host"
    return threading.active_count() > 1 or bool(mp.current_process().daemon)


@functools.cache
def preload() -> None:
    """Import :data:`PRELOAD` once, so forked children start with them loaded."""
    for name in PRELOAD:
        try:
            importlib.import_module(name)
        except ImportError:
            pass


def _kill_group(proc: Any) -> None:
    """SIGKILL the child's process group (the child and whatever it started), then the child."""
    with contextlib.suppress(OSError):
        os.killpg(proc.pid, signal.SIGKILL)
    if proc.is_alive():
        proc.kill()


def _tail(fh: Any) -> str:
    """The last line the child wrote on stdout or stderr, on one line ('' when silent)."""
    try:
        size = fh.seek(0, os.SEEK_END)
        fh.seek(max(0, size - _STDERR_TAIL))
        lines = [line.strip() for line in fh.read().decode(errors="replace").splitlines()]
    except OSError:
        return ""
    lines = [line for line in lines if line]
    return " ".join(lines[-1].split()) if lines else ""


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
    ``memory_limit`` counts what the call adds to a job process at rest (see the module notes).
    ``watch_pid``: stop waiting, and kill the child, when this process (the run's driver) dies.
    A raised exception becomes status ``failed`` with ``"Type: message"``; a child that dies
    without answering (a crash in compiled code) is ``failed`` with the signal that killed it
    and its last words, or ``memory`` when those words say an allocation failed.
    """
    if _use_host():
        from lowdim.run.jobhost import call_in_host

        return call_in_host(
            fn, args, timeout=timeout, memory_limit=memory_limit, watch_pid=watch_pid
        )
    preload()
    prepare = getattr(fn, "prepare", None)
    if prepare is not None:  # work the children share, done once here before forking
        prepare(*args)
    facts: dict = {}
    with tempfile.TemporaryFile() as captured:
        outcome = _run_forked(fn, args, timeout, memory_limit, watch_pid, captured, facts)
    return replace(outcome, facts=facts) if facts else outcome


def _run_forked(
    fn: Callable,
    args: tuple,
    timeout: float | None,
    memory_limit: int | None,
    watch_pid: int | None,
    captured: Any,
    facts: dict,
) -> Outcome:
    ctx = mp.get_context("fork")
    receive, send = ctx.Pipe(duplex=False)
    proc = ctx.Process(
        target=_child,
        args=(send, fn, args, memory_limit, captured.fileno()),
        daemon=True,
    )
    proc.start()
    # Set from both sides, so the group exists whichever runs first.
    with contextlib.suppress(OSError):
        os.setpgid(proc.pid, proc.pid)
    send.close()
    watched = psutil.Process(proc.pid)
    peak = baseline = 0
    watching = memory_limit is not None
    # The clock starts when the child is running, so that a slow start on a busy machine is
    # not charged to the job.
    start = time.monotonic()
    ready = False
    message = None
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
                    with contextlib.suppress(psutil.Error):
                        baseline = _private_resident(watched)
                    message = None
                    continue
                if message == _LIFTED:
                    watching = False
                    message = None
                    continue
                if isinstance(message, tuple) and message[0] == _FACTS:
                    facts.update(message[1])
                    message = None
                    continue
                break
            if not proc.is_alive():
                message = receive.recv() if receive.poll(0) else None
                break
            try:
                rss = _private_resident(watched)
            except psutil.Error:
                rss = 0
            peak = max(peak, rss)
            elapsed = time.monotonic() - start
            if watching and ready and rss - baseline > memory_limit:
                return Outcome(
                    "memory",
                    error=f"stopped when its work had added {(rss - baseline) / 2**20:.0f} MB "
                    f"to the {baseline / 2**20:.0f} MB of a job process at rest, over the "
                    f"limit of {memory_limit / 2**20:.0f} MB",
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
        _kill_group(proc)
        proc.join()
        receive.close()
    elapsed = time.monotonic() - start
    if message is None:
        return _died(proc.exitcode, _tail(captured), memory_limit, elapsed, peak)
    status, value = message[0], message[1]
    if status == "ok":
        return Outcome("ok", value=value, seconds=elapsed, peak_rss_mb=peak / 2**20)
    detail = message[2] if len(message) > 2 else None
    return Outcome(
        status, error=value, seconds=elapsed, peak_rss_mb=peak / 2**20, traceback=detail
    )


def _died(code: int | None, last: str, memory_limit: int | None, seconds: float, peak: int):
    """The outcome of a child that ended without answering."""
    how = (
        f"signal {signal.Signals(-code).name}"
        if code is not None and code < 0
        else f"exit status {code}"
    )
    said = f" (it said: {last})" if last else ""
    if memory_limit is not None and _ALLOCATION_FAILED.search(last):
        return Outcome(
            "memory",
            error=f"an allocation failed in compiled code{_limit_text(memory_limit)}: the "
            f"job's process ended with {how}{said}",
            seconds=seconds,
            peak_rss_mb=peak / 2**20,
        )
    return Outcome(
        "failed",
        error=f"the job's process died with {how} before returning a result{said}",
        seconds=seconds,
        peak_rss_mb=peak / 2**20,
    )


def available_cores() -> int:
    """Cores this process may run on (the affinity mask, not the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:
        return max(1, os.cpu_count() or 1)
