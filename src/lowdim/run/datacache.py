"""Each dataset loaded once per worker process, and handed to its jobs' children by fork.

A comparison runs every candidate on the same few resamples, so most jobs of a worker read
the same file and draw the same rows. The process that forks the jobs' children (a loky
worker, or a job host) loads a dataset before forking the first job that needs it, keeps it,
and every later child inherits it for free. Only small data is kept (:data:`MAX_FILE_BYTES`
on disk, :data:`MAX_GENERATED_ROWS` generated rows), so the memory limit keeps bounding the
loading of large data, which the child still does under its limits. A dataset that fails to
load here is simply not kept: the child loads it again and reports the failure as the job's.
"""

from __future__ import annotations

import json
import os
from collections import OrderedDict
from typing import Any

__all__ = ["MAX_FILE_BYTES", "MAX_GENERATED_ROWS", "KEPT", "cached", "key", "warm"]

MAX_FILE_BYTES = 64 * 2**20
MAX_GENERATED_ROWS = 200_000
KEPT = 4
"""Datasets kept per process, the most recently used."""

_DATASETS: OrderedDict[str, Any] = OrderedDict()


def key(job: Any) -> str:
    """What tells one job's dataset from another's."""
    return json.dumps([job.dataset_spec, job.data_sha256], sort_keys=True, default=str)


def _small(spec: dict) -> bool:
    if "file" in spec:
        try:
            return os.path.getsize(spec["file"]) <= MAX_FILE_BYTES
        except OSError:
            return False
    if "openml" in spec:
        return False
    return int(spec.get("n", 0) or 0) <= MAX_GENERATED_ROWS


def cached(job: Any) -> Any:
    """``(dataset, warnings its loading raised)`` for ``job`` if this process keeps it, else
    None."""
    name = key(job)
    if name in _DATASETS:
        _DATASETS.move_to_end(name)
        return _DATASETS[name]
    return None


def warm(job: Any, plugins: tuple[str, ...] = ()) -> None:
    """Load and keep ``job``'s dataset in this process when it is small (before forking)."""
    if cached(job) is not None or not _small(job.dataset_spec):
        return
    import warnings

    from lowdim import datasets

    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            data = datasets.load(dict(job.dataset_spec))
    except Exception:  # the child loads it again under the job's limits and reports why
        return
    _DATASETS[key(job)] = (data, list(caught))
    while len(_DATASETS) > KEPT:
        _DATASETS.popitem(last=False)
