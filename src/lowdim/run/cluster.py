"""The dask backend: jobs on a ``distributed`` cluster, results streamed back to the driver.

The driver connects to the scheduler (or starts a local cluster of worker processes), submits
one task per job and yields each job's record as soon as it finishes; only the driver writes
the store. A task carries the :class:`~lowdim.run.suites.Job` (dataset spec, method spec,
settings), never arrays: the worker loads or generates the data itself.

Each task runs :func:`lowdim.run.worker.run_job` in a worker thread, which hands the job to a
job host (:mod:`lowdim.run.jobhost`), so the time limit, the memory limit and the
process-group kill hold on a cluster exactly as on one machine, inside daemonic worker
processes and with several threads per worker.

Faults:

- A worker process that dies mid-job: the scheduler runs its tasks again on another worker;
  the driver receives each task's result once, so no job is lost or recorded twice. A job whose
  workers died :data:`ALLOWED_FAILURES` times is recorded as failed, saying so.
- The scheduler going away: the pending tasks are cancelled; the run stops with one line
  (:class:`ClusterLost`) and every job finished until then is in the store, so the same command
  resumes once a scheduler is back.
- The driver killed: the client's tasks are released; a rerun resumes from the store.
"""

from __future__ import annotations

import contextlib
import logging
import os
import re
import socket
import threading
from collections.abc import Iterator
from typing import Any

from lowdim.errors import InputError
from lowdim.run.suites import Job

__all__ = [
    "ClusterLost",
    "dask_results",
    "connect",
    "check_scheduler",
    "CONNECT_SECONDS",
    "ALLOWED_FAILURES",
]

CONNECT_SECONDS = 5
# distributed's own default: a task whose worker died this many times is given up.
ALLOWED_FAILURES = 3
_ADDRESS = re.compile(r"^(?:(?P<scheme>[a-z]+)://)?(?P<host>[^\s/:]+)(?::(?P<port>\d+))?/?$")
_DEFAULT_PORT = 8786


class ClusterLost(InputError):
    """The scheduler went away during the run; finished jobs are kept."""


def _unanswered(address: str, reason: str) -> InputError:
    return InputError(
        f"no dask scheduler answered at {address} within {CONNECT_SECONDS} s ({reason}); start "
        "one with `dask scheduler` or check --scheduler"
    )


def check_scheduler(address: str) -> str:
    """Check that something listens at a scheduler ``address`` (TCP) before the run starts.

    One line naming the address, as an :class:`~lowdim.errors.InputError`, when the address is
    malformed or nothing answers within :data:`CONNECT_SECONDS`; a refused connection fails at
    once. Returns the address.
    """
    match = _ADDRESS.match(address)
    if not match:
        raise InputError(
            f"--scheduler {address!r} is not a scheduler address; give one such as "
            "tcp://10.0.0.5:8786 or 127.0.0.1:8786"
        )
    if match["scheme"] not in (None, "tcp", "tls"):
        return address  # other transports are left to distributed to open
    port = int(match["port"] or _DEFAULT_PORT)
    try:
        with socket.create_connection((match["host"], port), timeout=CONNECT_SECONDS):
            pass
    except OSError as exc:
        raise _unanswered(address, exc.strerror or type(exc).__name__) from None
    return address


@contextlib.contextmanager
def _quiet_distributed() -> Iterator[None]:
    """distributed logs connection errors as tracebacks; the run reports them in one line."""
    if logging.getLogger("lowdim").isEnabledFor(logging.DEBUG):
        yield
        return
    names = ["distributed"]
    names += [n for n in logging.root.manager.loggerDict if n.startswith("distributed.")]
    saved = {name: logging.getLogger(name).level for name in names}
    for name in names:
        logging.getLogger(name).setLevel(logging.CRITICAL + 1)
    try:
        yield
    finally:
        for name, level in saved.items():
            logging.getLogger(name).setLevel(level)


@contextlib.contextmanager
def connect(scheduler: str | None, n_workers: int) -> Iterator[Any]:
    """A ``distributed.Client`` on ``scheduler``, or on a local cluster of ``n_workers``.

    A scheduler that does not answer within :data:`CONNECT_SECONDS` is an
    :class:`~lowdim.errors.InputError` naming the address.
    """
    from distributed import Client, LocalCluster

    with _quiet_distributed():
        cluster = None
        if scheduler:
            client = _client(check_scheduler(scheduler))
        else:
            cluster = LocalCluster(
                n_workers=n_workers,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
            )
            client = Client(cluster, set_as_default=False)
        try:
            yield client
        finally:
            with contextlib.suppress(Exception):
                client.close(timeout=5)
            if cluster is not None:
                with contextlib.suppress(Exception):
                    cluster.close(timeout=10)


def _client(address: str) -> Any:
    """A client of the scheduler at ``address``, or one line when no scheduler answers.

    distributed's own timeout does not cover a service that accepts the connection and then
    says nothing, so the handshake runs in a thread that is given up after the deadline.
    """
    from distributed import Client

    box: dict[str, Any] = {}

    def make() -> None:
        try:
            box["client"] = Client(address, timeout=CONNECT_SECONDS, set_as_default=False)
        except Exception as exc:  # refused, silent or foreign: not a scheduler
            box["error"] = exc

    thread = threading.Thread(target=make, name="lowdim-connect", daemon=True)
    thread.start()
    thread.join(CONNECT_SECONDS + 2)
    if "client" in box:
        return box["client"]
    reason = type(box["error"]).__name__ if "error" in box else "no answer to the handshake"
    raise _unanswered(address, reason)


def _error_record(job: Job, exc: BaseException) -> dict:
    from distributed import KilledWorker

    from lowdim.run.worker import failure_record

    if isinstance(exc, KilledWorker):
        return failure_record(
            job,
            f"the dask workers running this job died {ALLOWED_FAILURES} times; it was given "
            "up (`--retry` runs it again)",
        )
    text = " ".join(str(exc).split())
    return failure_record(job, f"the cluster could not run the job: {type(exc).__name__}: {text}")


def dask_results(client: Any, todo: list[Job], plugins: tuple[str, ...]) -> Iterator[dict]:
    """Submit every job to ``client``'s cluster; yield each record as its job finishes."""
    from distributed import as_completed

    from lowdim.run.worker import run_job

    watch = (socket.gethostname(), os.getpid())
    with _quiet_distributed():
        futures = {
            client.submit(
                run_job, job, plugins, watch, key=f"lowdim-{job.job_id}-{os.getpid()}", pure=False
            ): job
            for job in todo
        }
        finished = 0
        for future in as_completed(futures, loop=client.loop):
            job = futures[future]
            if future.status == "finished":
                finished += 1
                yield future.result()
            elif future.status == "error":
                finished += 1
                yield _error_record(job, future.exception())
            else:
                address = getattr(client.scheduler, "address", "the scheduler")
                for other in futures:
                    other.cancel()
                raise ClusterLost(
                    f"the dask scheduler at {address} went away after {finished} of "
                    f"{len(todo)} jobs; finished jobs are kept, run the same command again "
                    "to resume"
                )
