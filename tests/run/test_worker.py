"""The work a worker does once before forking its jobs changes no job's numbers."""

import numpy as np
import pytest

from lowdim.metrics import _input_memo
from lowdim.run import datacache, worker
from lowdim.run.suites import suite_from_dict


@pytest.fixture(autouse=True)
def _clean():
    _input_memo.forget()
    datacache._DATASETS.clear()
    worker._PRIMED.clear()
    yield
    _input_memo.forget()
    datacache._DATASETS.clear()
    worker._PRIMED.clear()


def _jobs():
    suite = suite_from_dict(
        {
            "suite": {"name": "w", "seeds": [0], "neighbors": [5, 10]},
            "datasets": [{"name": "two_moons", "n": 300, "noise": 0.05}],
            "methods": [
                {"name": "pca"},
                {"name": "laplacian_eigenmaps", "grid": {"n_neighbors": [8, 15]}},
            ],
        },
        source="w.toml",
    )
    return suite.jobs()


def _numbers(result: dict) -> tuple:
    values = [(m, k, v) for m, k, v in result["values"] if m not in {"fit_seconds", "peak_mb"}]
    rows, per_point = result["quality"]
    return values, rows.tolist(), {key: v.tolist() for key, v in per_point.items()}


def test_priming_keeps_the_input_side_once_and_scores_stay_the_same():
    jobs = _jobs()
    fresh = [_numbers(worker.execute_job(job)) for job in jobs]
    datacache._DATASETS.clear()
    worker.prepare_job(jobs[0])
    X = np.asarray(datacache.cached(jobs[0])[0].X, dtype=np.float64)
    memo = _input_memo.lookup(X)
    assert memo is not None and "lists" in memo
    for job in jobs[1:]:
        worker.prepare_job(job)  # the same data and settings: nothing computed again
    assert len(worker._PRIMED) == 1
    primed = [_numbers(worker.execute_job(job)) for job in jobs]
    assert primed == fresh
