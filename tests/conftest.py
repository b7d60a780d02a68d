"""Shared test fixtures: a results store written through the store's own API.

Test folders have no ``__init__.py``, so a helper shared by several test folders lives here as
a fixture (pytest offers this file's fixtures to every test below it). The suite is real
(validated by ``suite_from_dict``, its settings record resolved as the runner does) but the
jobs' numbers are invented: the store checks rendering, escaping and files, not statistics.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest

from lowdim.run.settings import resolve_settings
from lowdim.run.store import Store
from lowdim.run.suites import suite_from_dict


def fixture_suite(
    seeds: tuple[int, ...] = (0, 1),
    iris_label: str = "iris",
    small: bool = False,
    headline: list[str] | None = None,
) -> dict:
    """A noise axis, an n axis, a bandwidth sweep and an odd dataset label."""
    datasets = [
        {"name": "swiss_roll", "n": 60, "grid": {"noise": [0.0, 0.1, 0.3]}},
        {"name": "s_curve", "noise": 0.05, "grid": {"n": [40, 80, 160]}},
        {"name": "iris", "label": iris_label},
    ]
    methods = [
        {"name": "pca"},
        {"name": "laplacian_eigenmaps", "n_neighbors": 10},
        {"name": "kernel_pca", "kernel": "rbf", "grid": {"bandwidth": [0.5, 2.0, 8.0, "median"]}},
    ]
    if small:
        datasets = [{"name": "swiss_roll", "n": 60, "noise": 0.0}, {"name": "s_curve", "n": 40}]
        methods = methods[:2]
    settings = {
        "name": "fixture",
        "seeds": list(seeds),
        "neighbors": [5, 10],
        "metrics": ["trustworthiness", "continuity", "rnx", "rnx_auc", "stress", "knn_accuracy"],
    }
    if headline:
        settings["headline"] = headline
    return {"suite": settings, "datasets": datasets, "methods": methods}


# Invented quality, sensitivity to noise and time exponent of each method family.
_FAMILY = {"pca": (0.70, 0.3, 1.0), "laplacian_eigenmaps": (0.92, 1.6, 2.0)}
_BANDWIDTH = {0.5: 0.60, 2.0: 0.86, 8.0: 0.74, "median": 0.80}


def store_from_suite(
    folder: Path,
    suite_dict: dict,
    values: Callable,
    *,
    context: dict | None = None,
    blocks: str = "datasets",
) -> Path:
    """Write every job of a suite into ``folder`` through :class:`Store`, with invented numbers.

    ``values(job)`` returns ``{(metric, k): value}`` for a finished job, or a string (the error
    message) for a job that failed. The settings record is resolved as the runner resolves it.
    """
    rng = np.random.default_rng(7)
    suite = suite_from_dict(suite_dict, "suites/fixture.toml")
    settings = resolve_settings(suite, context=context, blocks=blocks)
    jobs = suite.jobs()
    with Store(folder) as store:
        run_id = store.start_run(
            command="lowdim run suites/fixture.toml --jobs 2",
            suite_name=suite.name,
            suite_path=suite.source,
            suite_text=suite.text,
            environment={"python": "3.11", "packages": {"numpy": np.__version__}},
            settings=settings.to_json(),
            planned=[(j.job_id, j.dataset_label, j.method_label, j.seed) for j in jobs],
        )
        for job in jobs:
            spec = job.dataset_spec
            n = int(spec.get("n", 150))
            got = values(job)
            result = {
                "job": job,
                "status": "ok",
                "error": None,
                "n_samples": n,
                "n_features": 4 if spec.get("name") == "iris" else 3,
                "started": "2024-05-01T10:00:01+00:00",
                "finished": "2024-05-01T10:00:02+00:00",
                "data_fingerprint": json.dumps(sorted(spec.items()), default=str)[:40],
                "colour": ("truth", np.linspace(0.0, 1.0, n)),
            }
            if isinstance(got, str):
                result.update(status="timeout", error=got)
            else:
                result["values"] = [(m, k, float(v)) for (m, k), v in got.items()]
                result["fit_seconds"] = got.get(("fit_seconds", 0))
                result["embedding"] = rng.standard_normal((n, 2))
            store.record(result, run_id)
        store.finish_run(run_id)
    return folder


def _write_store(
    folder: Path,
    *,
    seeds: tuple[int, ...] = (0, 1),
    iris_label: str = "iris",
    small: bool = False,
    headline: list[str] | None = None,
) -> Path:
    """The fixture suite's jobs in ``folder``; Laplacian eigenmaps times out once.

    ``iris_label`` is the display label of the last dataset (a test of escaping passes
    markup). ``small`` keeps two datasets and two methods.
    """
    rng = np.random.default_rng(7)

    def values(job) -> dict | str:
        spec, method = job.dataset_spec, job.method_spec
        n = int(spec.get("n", 150))
        noise = float(spec.get("noise", 0.0))
        quality, fragility, power = _FAMILY.get(method["name"], (0.0, 0.6, 2.0))
        if method["name"] == "kernel_pca":
            quality = _BANDWIDTH[method["bandwidth"]]
        if method["name"] == "laplacian_eigenmaps" and n == 160 and job.seed == seeds[-1]:
            return "ran past the 120 s limit <b>after</b> 3 tries"
        fit = 1e-5 * n**power
        q = quality * (1 - fragility * noise) + 0.01 * rng.standard_normal()
        scores = {
            ("trustworthiness", 5): q,
            ("trustworthiness", 10): q - 0.02,
            ("continuity", 5): q + 0.03,
            ("continuity", 10): q + 0.01,
            ("rnx_auc", 0): q - 0.3,
            ("stress", 0): 1.1 - q,
            ("fit_seconds", 0): fit,
            ("peak_mb", 0): 50 + n / 10,
        }
        for k in (1, 2, 5, 10, 20, 30):
            scores[("rnx", k)] = (q - 0.3) * (1 - 0.1 * np.log(k))
        if spec["name"] == "iris":
            scores[("knn_accuracy", 5)] = q
            scores[("knn_accuracy", 10)] = q - 0.01
        if method.get("bandwidth") == "median":
            scores[("bandwidth", 0)] = 1.7
        return scores

    return store_from_suite(folder, fixture_suite(seeds, iris_label, small, headline), values)


@pytest.fixture(scope="session")
def write_store() -> Callable[..., Path]:
    """The store writer ``write_store(folder, *, seeds, iris_label, small, headline)``."""
    return _write_store


@pytest.fixture(scope="session")
def write_suite_store() -> Callable[..., Path]:
    """``write_suite_store(folder, suite_dict, values, *, context, blocks) -> folder``."""
    return store_from_suite
