"""What runs inside one job: load the data, fit the method, score the embedding.

:func:`run_job` is what a joblib worker (loky or dask) calls; it runs :func:`execute_job` in a
child process under the job's limits (see :mod:`lowdim.run.limits`) and returns a plain dict the
driver writes to the store. Nothing here touches the store: only the driver writes.
"""

from __future__ import annotations

import hashlib
import os
import resource
import socket
import time
import warnings
from datetime import UTC, datetime
from typing import Any

import numpy as np
from threadpoolctl import threadpool_limits

from lowdim.run import datacache
from lowdim.run.datafiles import check_data_file, dask_worker_address, where_am_i
from lowdim.run.limits import Outcome, lift_memory_limit, run_limited, tell_parent
from lowdim.run.settings import headline_k
from lowdim.run.suites import RUNNER_METRICS, Job

__all__ = [
    "build_estimator",
    "execute_job",
    "run_job",
    "job_record",
    "failure_record",
    "data_fingerprint",
    "point_colours",
]

# Rows used to find the first principal direction that colours data with no truth or labels.
_COLOUR_ROWS = 5000


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds")


def build_estimator(job: Job) -> Any:
    """The job's estimator, with the suite's ``n_components`` and the job's seed filled in.

    ``n_components`` and ``random_state`` are set only where the estimator has them and the
    suite did not fix them in the method's table.
    """
    from lowdim.methods import get_method, import_object

    spec = job.method_spec
    cls = get_method(spec["name"]) if "name" in spec else import_object(spec["import"])
    params = job.method_params
    estimator = cls(**params)
    known = estimator.get_params(deep=False)
    extra = {}
    if "n_components" in known and "n_components" not in params:
        extra["n_components"] = job.n_components
    if "random_state" in known and "random_state" not in params:
        extra["random_state"] = job.seed
    return estimator.set_params(**extra) if extra else estimator


def data_fingerprint(X: np.ndarray) -> str:
    """A hash of the data matrix: two jobs with equal fingerprints embedded the same points."""
    digest = hashlib.sha256(np.ascontiguousarray(X, dtype=np.float64).tobytes())
    digest.update(repr(X.shape).encode())
    return digest.hexdigest()[:20]


def point_colours(X: np.ndarray, labels: Any, truth: Any) -> tuple[str, np.ndarray]:
    """What colours the points in the report's gallery, with its kind.

    The first intrinsic coordinate where the data have one (``"truth"``), the class labels
    otherwise (``"labels"``), else the scores on the first principal direction (``"pc1"``,
    the direction found on at most 5,000 rows drawn with a fixed seed).
    """
    if truth is not None:
        return "truth", np.asarray(truth, dtype=np.float64).reshape(len(X), -1)[:, 0].copy()
    if labels is not None:
        return "labels", np.asarray(labels).copy()
    rows = X
    if len(X) > _COLOUR_ROWS:
        rows = X[np.random.default_rng(0).choice(len(X), _COLOUR_ROWS, replace=False)]
    centre = rows.mean(axis=0)
    _, _, vt = np.linalg.svd(rows - centre, full_matrices=False)
    direction = vt[0] if np.abs(vt[0]).max() == vt[0].max() else -vt[0]
    return "pc1", (X - centre) @ direction


def _reset_peak() -> bool:
    """Reset the kernel's peak-RSS counter of this process (Linux); False when unavailable."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def _peak_rss() -> int:
    """Peak resident memory of this process in bytes (since the last reset, on Linux)."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _rss() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def execute_job(job: Job, plugins: tuple[str, ...] = ()) -> dict:
    """Load, fit and score one job in this process; return the embedding and the scores.

    ``peak_mb`` is the memory the fit added: the peak resident set size during
    ``fit_transform`` less the resident size just before it (the interpreter and the loaded
    data are not counted), from the kernel's high-water mark ``VmHWM``.
    """
    from lowdim import datasets, metrics
    from lowdim.methods import load_plugin

    for path in plugins:
        load_plugin(path)
    started = _now()
    with threadpool_limits(limits=job.threads), warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        kept = datacache.cached(job)
        if kept is None:
            data = datasets.load(dict(job.dataset_spec))
        else:
            data, raised = kept
            for w in raised:  # the job's notes are the same whoever loaded the data
                warnings.warn(w.message, w.category, stacklevel=1)
        X = np.asarray(data.X, dtype=np.float64)
        # Known to the parent even if a limit stops the fit: where a method stops is a result.
        tell_parent(n_samples=int(X.shape[0]), n_features=int(X.shape[1]))
        fingerprint = data_fingerprint(X)
        colour = point_colours(X, data.labels, data.truth)
        estimator = build_estimator(job)
        _reset_peak()
        before = _rss()
        tic = time.perf_counter()
        Y = estimator.fit_transform(X)
        fit_seconds = time.perf_counter() - tic
        peak_mb = max(0, _peak_rss() - before) / 2**20
        # The memory limit is for loading and fitting; scoring works in blocks of bounded size.
        lift_memory_limit()
        # The kernel scale a rule picked, so the report can mark it on the sensitivity curves.
        sigma = getattr(estimator, "bandwidth_", None)
        if hasattr(Y, "toarray"):
            Y = Y.toarray()
        Y = np.asarray(Y, dtype=np.float64)
        if Y.ndim != 2 or Y.shape[0] != X.shape[0]:
            raise ValueError(
                f"the method returned an embedding of shape {Y.shape} for {X.shape[0]} samples; "
                "fit_transform must return one row per sample"
            )
        wanted = _wanted(job)
        values: list[tuple[str, int, float]] = []
        notes: list[str] = []
        sample_size = None
        quality = None
        tic = time.perf_counter()
        if wanted is None or wanted:
            scores = metrics.score_embedding(X, Y, **_scoring(job, wanted, data))
            values = [(str(m), int(k or 0), float(v)) for m, k, v in scores.values]
            notes = [str(n) for n in (scores.notes or [])]
            sample_size = scores.sample_size
            if getattr(scores, "per_point", None):
                quality = (scores.per_point_rows, scores.per_point)
        diagnoses = [
            d.as_dict()
            for d in metrics.find_degeneracies(Y, X=X, fitted=estimator, random_state=job.seed)
        ]
        score_seconds = time.perf_counter() - tic
    # Warnings (a disconnected graph, a solver fallback) belong to the job: kept in its notes
    # rather than printed by every job process onto the terminal.
    seen = [f"{w.category.__name__}: {w.message}" for w in caught]
    notes = list(dict.fromkeys([*notes, *(" ".join(text.split()) for text in seen)]))
    values += [("fit_seconds", 0, fit_seconds), ("peak_mb", 0, peak_mb)]
    if isinstance(sigma, int | float | np.floating) and np.isfinite(sigma):
        values.append(("bandwidth", 0, float(sigma)))
    return {
        "embedding": Y,
        "values": values,
        "notes": notes,
        "sample_size": sample_size,
        "fit_seconds": fit_seconds,
        "peak_mb": peak_mb,
        "n_samples": int(X.shape[0]),
        "n_features": int(X.shape[1]),
        "data_fingerprint": fingerprint,
        "colour": colour,
        "quality": quality,
        "diagnoses": diagnoses,
        "score_seconds": score_seconds,
        "started": started,
        "finished": _now(),
    }


def _wanted(job: Job) -> list[str] | None:
    """The criteria scored from the embedding (None: every one)."""
    return None if job.metrics is None else [m for m in job.metrics if m not in RUNNER_METRICS]


def _scoring(job: Job, wanted: list[str] | None, data: Any) -> dict[str, Any]:
    """score_embedding's settings for ``job``: one place for the job and for priming."""
    return {
        "metrics": wanted,
        "ks": job.neighbors,
        "labels": data.labels,
        "truth": data.truth,
        "random_state": job.seed,
        "per_point_k": headline_k(job.neighbors),
    }


_PRIMED: set[tuple] = set()


def prepare_job(job: Job, plugins: tuple[str, ...] = ()) -> None:
    """Work the children of one worker share, done once before forking them: load the job's
    small dataset, and compute the input side of its scoring (the neighbour lists and ranks
    of X that every embedding of it is scored against; lowdim.metrics._input_memo)."""
    datacache.warm(job, plugins)
    kept = datacache.cached(job)
    wanted = _wanted(job)
    primed = (datacache.key(job), job.seed, tuple(job.neighbors), repr(wanted), job.n_components)
    if kept is None or wanted == [] or primed in _PRIMED:
        return
    _PRIMED.add(primed)
    from lowdim.metrics import _input_memo

    data = kept[0]
    # One thread, as the job's children will use: the forking process stays single-threaded.
    with threadpool_limits(limits=1), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        _input_memo.prime(data.X, job.n_components, **_scoring(job, wanted, data))


# lowdim.run.limits calls this in the process that forks a job's child, before forking.
execute_job.prepare = prepare_job  # type: ignore[attr-defined]


def run_job(job: Job, plugins: tuple[str, ...] = (), watch: tuple[str, int] | None = None) -> dict:
    """Run one job under its limits in a child process; return the record for the store.

    Never raises for a failing job: the record's ``status`` says what happened
    (ok, failed, timeout, memory) and ``error`` why. ``watch`` is the driver's (host, pid):
    on the same host, the job is abandoned when the driver dies.
    """
    started = _now()
    watch_pid = watch[1] if watch is not None and watch[0] == socket.gethostname() else None
    problem = check_data_file(job.dataset_spec, job.data_sha256, plugins, where_am_i())
    if problem is not None:
        outcome = Outcome("failed", error=problem)
    else:
        outcome = run_limited(
            execute_job,
            (job, tuple(plugins)),
            timeout=job.timeout,
            memory_limit=job.memory_limit,
            watch_pid=watch_pid,
        )
    if outcome.abandoned and watch_pid != os.getpid() and dask_worker_address() is None:
        # The driver is gone, so no one will read this record; a loky worker left behind
        # would idle for minutes. (A dask worker belongs to its cluster and stays.)
        os._exit(1)
    return job_record(job, outcome, started)


def job_record(job: Job, outcome: Outcome, started: str) -> dict:
    """The record the driver stores for ``job`` from its :class:`Outcome`."""
    record: dict[str, Any] = {
        "job": job,
        "status": outcome.status,
        "error": outcome.error,
        "traceback": outcome.traceback,
        "embedding": None,
        "values": [],
        "notes": [],
        "sample_size": None,
        "fit_seconds": None,
        "peak_mb": None,
        "n_samples": None,
        "n_features": None,
        "started": started,
        "finished": _now(),
    }
    if outcome.status == "ok":
        record.update(outcome.value)
    else:
        record.update({k: v for k, v in outcome.facts.items() if k in record})
    return record


def failure_record(job: Job, error: str) -> dict:
    """The record of a job that could not be run at all (status ``failed``)."""
    return job_record(job, Outcome("failed", error=error), _now())
