"""One writer per results folder: a lock that dies with its process, and who holds it.

A run (``lowdim run``, ``lowdim compare``) holds an exclusive ``fcntl.flock`` on
``<folder>/.lowdim-lock`` for as long as it writes into the folder. The operating system
releases the lock when the process ends, however it ends (a SIGKILL, an out-of-memory kill),
so a killed run never leaves the folder locked. The lock file also holds a small JSON record
of its holder (pid, host, command, since when), written after the lock is taken and cleared
before it is released, so that a second run can say which run is busy, and a record found on
a lock nobody holds is one a killed run left behind: it is taken over, with a note.

On a file system without ``flock`` (some network and FUSE mounts) the record alone decides: a
holder on this host whose pid is gone is stale and taken over; a holder on another host is
taken as busy, and the message says how to clear it by hand.

The lock is re-entrant within a process (a command holds it across several runs into one
folder, as ``lowdim compare`` does), and a forked child does not keep it: job processes are
forked from the driver, and a job outliving a killed driver must not hold the folder.
"""

from __future__ import annotations

import errno
import fcntl
import json
import logging
import os
import socket
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import asdict, dataclass
from datetime import datetime
from pathlib import Path

from lowdim.errors import InputError

__all__ = ["LOCK_NAME", "Holder", "FolderBusy", "folder_lock", "current_holder"]

log = logging.getLogger("lowdim.run.lock")

LOCK_NAME = ".lowdim-lock"
POLL_SECONDS = 1.0
"""How often a waiting run looks again where the file system has no ``flock``."""

# errno values meaning the file system does not do flock (then the record alone decides)
_NO_FLOCK = frozenset({errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS, errno.EINVAL})


@dataclass(frozen=True)
class Holder:
    """The run that holds (or held) a folder's lock."""

    pid: int
    host: str
    command: str
    since: str

    def text(self) -> str:
        return f"pid {self.pid} on {self.host}, since {self.since}: {self.command}"

    def alive(self) -> bool | None:
        """Whether its process still runs: None when it runs on another host (unknowable)."""
        if self.host != socket.gethostname():
            return None
        try:
            os.kill(self.pid, 0)
        except ProcessLookupError:
            return False
        except PermissionError:  # another user's live process
            return True
        return True


class FolderBusy(InputError):
    """Another run holds the results folder."""


# folder (resolved) -> [lock file descriptor, depth]; the process's own holds
_held: dict[str, list[int]] = {}


def _forget_in_child() -> None:
    # Closing the child's copies leaves the parent's lock in place (flock belongs to the
    # open file, released when its last descriptor closes or by the holder's LOCK_UN).
    for fd, _ in _held.values():
        try:
            os.close(fd)
        except OSError:
            pass
    _held.clear()


os.register_at_fork(after_in_child=_forget_in_child)


def _read(fd: int) -> Holder | None:
    data = os.pread(fd, 65536, 0)
    if not data.strip():
        return None
    try:
        return Holder(**json.loads(data))
    except (ValueError, TypeError):
        return Holder(pid=0, host="?", command="(its record is being written)", since="?")


def _write(fd: int, holder: Holder | None) -> None:
    os.ftruncate(fd, 0)
    if holder is not None:
        os.pwrite(fd, json.dumps(asdict(holder)).encode(), 0)
        os.fsync(fd)


def current_holder(folder: str | Path) -> Holder | None:
    """The record of the run writing into ``folder``, if one is recorded (read without taking
    the lock: for ``lowdim status``; a record whose process is gone is a killed run's)."""
    try:
        fd = os.open(Path(folder) / LOCK_NAME, os.O_RDONLY)
    except OSError:
        return None
    try:
        return _read(fd)
    finally:
        os.close(fd)


def _busy(folder: Path, holder: Holder | None) -> FolderBusy:
    who = holder.text() if holder else "its record is unreadable"
    return FolderBusy(
        f"the results folder {str(folder)!r} is in use by another lowdim run ({who}); wait for "
        "it to end (add --wait to start then), or give another --out"
    )


def _try_flock(fd: int) -> bool | None:
    """True when the lock was taken, False when it is held, None without flock here."""
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    except OSError as exc:
        if exc.errno in _NO_FLOCK:
            return None
        raise
    return True


def _take(fd: int, folder: Path, wait: bool) -> None:
    """Take the folder's lock on ``fd``, or raise :class:`FolderBusy` (or wait for it)."""
    said = False
    while True:
        taken = _try_flock(fd)
        previous = _read(fd)
        if taken is None:  # no flock here: the record decides
            alive = previous.alive() if previous else False
            taken = not (previous and alive is not False)
            if not taken and alive is None and not wait:
                raise FolderBusy(
                    f"{_busy(folder, previous)}; this file system has no locks, so lowdim "
                    f"cannot tell whether that run still goes: if it has ended, delete "
                    f"{str(folder / LOCK_NAME)!r}"
                )
        if taken:
            if previous is not None:
                log.warning(
                    "taking over the results folder %s from a run that ended without "
                    "releasing it (%s)",
                    folder,
                    previous.text(),
                )
            return
        if not wait:
            raise _busy(folder, previous)
        if not said:
            who = previous.text() if previous else "its record is unreadable"
            log.warning("waiting for the run writing into %s to end (%s)", folder, who)
            said = True
        time.sleep(POLL_SECONDS)


@contextmanager
def folder_lock(
    folder: str | Path, *, wait: bool = False, command: str = "lowdim"
) -> Iterator[None]:
    """Hold the one-writer lock of ``folder`` (an existing folder) while the block runs.

    Parameters
    ----------
    folder : path
        The results folder.
    wait : bool, default=False
        When another run holds it, wait for that run to end instead of raising.
    command : str
        What this run is, for the message another run shows.

    Raises
    ------
    FolderBusy
        When another live run holds the folder and ``wait`` is False.
    """
    key = os.path.realpath(folder)
    if key in _held:
        _held[key][1] += 1
        try:
            yield
        finally:
            _held[key][1] -= 1
        return
    path = Path(folder) / LOCK_NAME
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        _take(fd, Path(folder), wait)
        since = datetime.now().astimezone().isoformat(timespec="seconds")
        _write(fd, Holder(os.getpid(), socket.gethostname(), command, since))
        _held[key] = [fd, 1]
        try:
            yield
        finally:
            del _held[key]
            _write(fd, None)
    finally:
        os.close(fd)  # releases the flock
