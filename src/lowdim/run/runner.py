"""Execute a suite's jobs: caching by job id, parallel backends, limits, recording, resuming.

The driver (this module) hands jobs to joblib (loky processes by default, or a dask
``distributed`` cluster); each job runs in a child process under its time and memory limits
(:mod:`lowdim.run.limits`), and only the driver writes results, one transaction per finished job
(:mod:`lowdim.run.store`).

Caching: a rerun skips every job whose id is already in the store, whatever its status, so a
rerun recomputes nothing (a failure under the same settings is expected to fail again).
``retry=True`` (``--retry``) reruns the jobs that did not finish ``ok``, for instance after
raising a time limit; ``force=True`` (``--force``) recomputes every job. A job recorded ``ok``
whose embedding (or colour or quality file) is missing or damaged counts as not finished and
runs again; a job recorded ``ok`` is never replaced by a later attempt that failed, except
with ``force``.

One writer: the driver claims the results folder (:mod:`lowdim.run.folder`: lowdim writes only
into folders it created or recognises) and holds its lock for the whole run
(:mod:`lowdim.run.lock`); a second run into the same folder stops in one line, or waits with
``wait=True`` (``--wait``).

Determinism: every job runs with the same number of BLAS/OpenMP threads (the suite's
``threads``, 1 by default), whatever ``n_jobs`` and the backend, so the floating-point reductions
and hence the scores are identical; ``n_jobs`` is capped so that workers x threads never
exceeds the cores.
"""

from __future__ import annotations

import contextlib
import logging
import os
import platform
import shlex
import socket
import sys
import time
from collections import Counter
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from lowdim import __version__
from lowdim.errors import InputError
from lowdim.run.folder import results_folder
from lowdim.run.limits import available_cores
from lowdim.run.settings import resolve_settings
from lowdim.run.store import Store
from lowdim.run.suites import Job, Suite
from lowdim.run.worker import run_job

__all__ = ["RunSummary", "run_suite", "environment", "BACKENDS"]

log = logging.getLogger("lowdim.run.runner")
BACKENDS = ("loky", "dask")


@dataclass(frozen=True)
class RunSummary:
    """What a run did: how many jobs it found finished, ran, and how each ended."""

    out_dir: Path
    run_id: int
    total: int
    skipped: int
    counts: dict[str, int] = field(default_factory=dict)
    seconds: float = 0.0

    @property
    def ran(self) -> int:
        return sum(self.counts.values())

    @property
    def failed(self) -> int:
        return self.ran - self.counts.get("ok", 0)


def environment(*, n_jobs: int, backend: str, threads: int, scheduler: str | None) -> dict:
    """Versions, BLAS libraries with their thread counts, the CPU and the parallel settings."""
    import joblib
    import numpy
    import scipy
    import sklearn
    from threadpoolctl import threadpool_info

    return {
        "lowdim": __version__,
        "python": platform.python_version(),
        "numpy": numpy.__version__,
        "scipy": scipy.__version__,
        "scikit-learn": sklearn.__version__,
        "joblib": joblib.__version__,
        "threadpools": [
            {k: info.get(k) for k in ("user_api", "internal_api", "version", "num_threads")}
            for info in threadpool_info()
        ],
        "cpu": _cpu_model(),
        "cores": os.cpu_count(),
        "cores_available": available_cores(),
        "platform": platform.platform(),
        "host": socket.gethostname(),
        "backend": backend,
        "scheduler": scheduler,
        "n_jobs": n_jobs,
        "threads_per_job": threads,
    }


def _cpu_model() -> str:
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def _check_parallel(n_jobs: int, backend: str, threads: int) -> int:
    if backend not in BACKENDS:
        raise InputError(
            f"unknown backend {backend!r}; choose one of {', '.join(BACKENDS)} (--backend)"
        )
    if isinstance(n_jobs, bool) or not isinstance(n_jobs, int) or (n_jobs < 1 and n_jobs != -1):
        raise InputError(
            f"--jobs must be a positive number of workers or -1 for all, got {n_jobs}"
        )
    if backend == "dask":
        try:
            import distributed  # noqa: F401
        except ImportError:
            raise InputError(
                "the dask backend needs the `distributed` package; install it with "
                'pip install "lowdim[dask]"'
            ) from None
        return n_jobs
    most = max(1, available_cores() // threads)
    if n_jobs == -1:
        return most
    if n_jobs > most:
        log.warning(
            "--jobs %d with %d thread(s) per job would oversubscribe %d core(s); using %d workers",
            n_jobs,
            threads,
            available_cores(),
            most,
        )
        return most
    return n_jobs


def _select(
    jobs: list[Job], statuses: dict[str, str], damaged: set[str], *, force: bool, retry: bool
) -> list[Job]:
    """The jobs to run: all (``force``), those not ``ok`` (``retry``) or those not in the store,
    and in every case the ``ok`` jobs whose files are missing or damaged."""
    if force:
        return list(jobs)
    if retry:
        return [j for j in jobs if statuses.get(j.job_id) != "ok" or j.job_id in damaged]
    return [j for j in jobs if j.job_id not in statuses or j.job_id in damaged]


def _local_results(todo: list[Job], plugins: tuple[str, ...], n_jobs: int) -> Iterator[dict]:
    """Yield each job's record as soon as it finishes, in completion order (loky)."""
    from joblib import Parallel, delayed, parallel_config

    watch = (socket.gethostname(), os.getpid())
    tasks = (delayed(run_job)(job, plugins, watch) for job in todo)
    with parallel_config(backend="loky"):
        yield from Parallel(n_jobs=n_jobs, return_as="generator_unordered")(tasks)


@contextlib.contextmanager
def _executor(backend: str, scheduler: str | None, n_jobs: int, threads: int):
    """A function ``(todo, plugins) -> records``; dask connects before anything is written."""
    if backend != "dask":
        yield lambda todo, plugins: _local_results(todo, plugins, n_jobs)
        return
    from lowdim.run.cluster import connect, dask_results

    workers = n_jobs if n_jobs > 0 else max(1, available_cores() // threads)
    with connect(scheduler, workers) as client:
        yield lambda todo, plugins: dask_results(client, todo, plugins)


def run_suite(
    suite: Suite,
    out_dir: str | Path,
    *,
    n_jobs: int = 1,
    backend: str = "loky",
    scheduler: str | None = None,
    force: bool = False,
    quiet: bool = False,
    retry: bool = False,
    plugins: tuple[str, ...] | list[str] = (),
    command: str | None = None,
    context: dict | None = None,
    blocks: str = "datasets",
    kind: str = "suite",
    wait: bool = False,
) -> RunSummary:
    """Run every job of ``suite`` not yet in ``out_dir``'s store, record it, export the scores.

    Parameters
    ----------
    suite : Suite
        A validated suite (:func:`lowdim.run.suites.load_suite`).
    out_dir : path
        The results folder; created if missing.
    n_jobs : int, default=1
        Worker processes (loky) or ignored in favour of the cluster's workers (dask); -1 uses
        every core. Capped so that workers x the suite's ``threads`` never exceed the cores.
    backend : {"loky", "dask"}, default="loky"
    scheduler : str, optional
        Address of a dask ``distributed`` scheduler; with the dask backend and no address, a
        local cluster of ``n_jobs`` workers on 127.0.0.1 is started for the run.
    force : bool, default=False
        Recompute every job, finished or not.
    quiet : bool, default=False
        No progress bar.
    retry : bool, default=False
        Rerun the jobs that finished with a status other than ``ok``.
    plugins : sequence of paths
        Plugin files that register methods; every job process loads them again.
    command : str, optional
        The command line to record; defaults to ``sys.argv``.
    context : dict, optional
        What a comparison found in its data, kept in the run's settings record.
    blocks : {"datasets", "resamples"}, default="datasets"
        What the blocks of the run's tests are (see :mod:`lowdim.run.settings`).
    kind : {"suite", "confirmation"}, default="suite"
        A confirmation run follows a comparison (:mod:`lowdim.run.confirm`).
    wait : bool, default=False
        When another run writes into ``out_dir``, wait for it to end instead of raising
        :class:`lowdim.run.lock.FolderBusy`.

    Returns
    -------
    RunSummary

    Raises
    ------
    InputError
        When ``out_dir`` is a folder lowdim did not create or holds a damaged or foreign
        store, and :class:`lowdim.run.lock.FolderBusy` when another run writes there.
    """
    from tqdm import tqdm

    n_jobs = _check_parallel(n_jobs, backend, suite.threads)
    plugins = tuple(str(Path(p).resolve()) for p in plugins)
    settings = resolve_settings(suite, context=context, blocks=blocks)
    jobs = suite.jobs()
    command = command or shlex.join(sys.argv)
    tic = time.monotonic()
    counts: Counter[str] = Counter()
    with (
        results_folder(out_dir, wait=wait, command=command, option="the results folder") as out,
        _executor(backend, scheduler, n_jobs, suite.threads) as results,
        Store(out) as store,
    ):
        damaged = store.damaged()
        todo = _select(jobs, store.statuses(), set(damaged), force=force, retry=retry)
        again = [j for j in todo if j.job_id in damaged]
        if again and not force:
            name, problem = damaged[again[0].job_id][0]
            log.warning(
                "%d finished job%s a missing or damaged file and run%s again (the first: %s %s)",
                len(again),
                "s have" if len(again) > 1 else " has",
                "" if len(again) > 1 else "s",
                name,
                problem,
            )
        run_id = store.start_run(
            command=command,
            suite_name=suite.name,
            suite_path=suite.source,
            suite_text=suite.text,
            environment=environment(
                n_jobs=n_jobs, backend=backend, threads=suite.threads, scheduler=scheduler
            ),
            settings=settings.to_json(),
            planned=[(j.job_id, j.dataset_label, j.method_label, j.seed) for j in jobs],
            kind=kind,
        )
        log.info(
            "%s: %d jobs, %d to run, %d already finished",
            suite.name,
            len(jobs),
            len(todo),
            len(jobs) - len(todo),
        )
        bar = tqdm(
            total=len(todo),
            disable=quiet or not todo,
            file=sys.stderr,
            unit="job",
            desc=suite.name,
            dynamic_ncols=True,
        )
        try:
            for record in results(todo, plugins) if todo else ():
                kept = not store.record(record, run_id, replace_ok=force)
                job = record["job"]
                counts[record["status"]] += 1
                if kept:
                    log.warning(
                        "%s on %s (seed %d): %s this time; its earlier ok result is kept "
                        "(--force replaces it)",
                        job.method_label,
                        job.dataset_label,
                        job.seed,
                        record["status"],
                    )
                elif record["status"] != "ok":
                    log.warning(
                        "%s on %s (seed %d): %s: %s",
                        job.method_label,
                        job.dataset_label,
                        job.seed,
                        record["status"],
                        record["error"],
                    )
                    if record.get("traceback"):
                        log.debug("traceback of job %s:\n%s", job.job_id, record["traceback"])
                done = sum(counts.values())
                bar.set_postfix(failed=done - counts["ok"], left=len(todo) - done, refresh=False)
                bar.update(1)
        finally:
            bar.close()
        store.finish_run(run_id)
    return RunSummary(
        out_dir=out,
        run_id=run_id,
        total=len(jobs),
        skipped=len(jobs) - len(todo),
        counts=dict(counts),
        seconds=time.monotonic() - tic,
    )
