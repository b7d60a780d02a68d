"""Shared test fixtures: a results store written in the schema of DEVELOPERS.md.

Test folders have no ``__init__.py``, so a helper shared by ``tests/`` and
``tests/commands/`` lives here as a fixture (pytest offers this file's fixtures to every
test below it). The store's numbers are invented: it checks rendering, escaping and files,
not statistics.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest

SCHEMA = """
CREATE TABLE jobs (job_id TEXT PRIMARY KEY, dataset TEXT, dataset_label TEXT,
    dataset_params TEXT, method TEXT, method_label TEXT, method_params TEXT, seed INTEGER,
    n_components INTEGER, status TEXT, error TEXT, fit_seconds REAL, peak_mb REAL,
    n_samples INTEGER, n_features INTEGER, sample_size INTEGER, started TEXT, finished TEXT,
    lowdim_version TEXT, run_id INTEGER);
CREATE TABLE scores (job_id TEXT, metric TEXT, k INTEGER, value REAL,
    PRIMARY KEY (job_id, metric, k));
CREATE TABLE runs (run_id INTEGER PRIMARY KEY, command TEXT, suite_name TEXT, suite_path TEXT,
    suite_text TEXT, environment TEXT, started TEXT, finished TEXT);
"""

SUITE_TEXT = """[suite]
name = "fixture"
seeds = [0, 1]
"""


def _write_store(
    folder: Path,
    *,
    seeds: tuple[int, ...] = (0, 1),
    iris_label: str = "iris",
    small: bool = False,
) -> Path:
    """A small run: a noise axis, an n axis, a bandwidth sweep, a failure, an odd label.

    ``iris_label`` is the dataset label of the last dataset (a test of escaping passes
    markup). ``small`` keeps two datasets and two methods, for tests that build reports
    several times and only need a store the report reads.
    """
    rng = np.random.default_rng(7)
    (folder / "embeddings").mkdir(parents=True)
    datasets = [
        ("swiss_roll", f"swiss_roll(noise={z})", {"name": "swiss_roll", "n": 60, "noise": z})
        for z in (0.0, 0.1, 0.3)
    ]
    datasets += [
        ("s_curve", f"s_curve(n={n})", {"name": "s_curve", "n": n, "noise": 0.05})
        for n in (40, 80, 160)
    ]
    datasets += [("iris", iris_label, {"name": "iris"})]
    methods = [
        ("pca", "pca", {"name": "pca"}, 0.70, 0.3, 1.0),
        (
            "laplacian_eigenmaps",
            "laplacian_eigenmaps",
            {"name": "laplacian_eigenmaps", "n_neighbors": 10},
            0.92,
            1.6,
            2.0,
        ),
    ]
    methods += [
        (
            "kernel_pca",
            f"kernel_pca(bandwidth={b})",
            {"name": "kernel_pca", "kernel": "rbf", "bandwidth": b},
            q,
            0.6,
            2.0,
        )
        for b, q in ((0.5, 0.60), (2.0, 0.86), (8.0, 0.74), ("median", 0.80))
    ]
    if small:
        datasets, methods = [datasets[0], datasets[3]], methods[:2]
    con = sqlite3.connect(folder / "store.sqlite")
    con.executescript(SCHEMA)
    con.execute(
        "INSERT INTO runs VALUES (1, ?, 'fixture', 'suites/fixture.toml', ?, ?, ?, ?)",
        (
            "lowdim run suites/fixture.toml --jobs 2",
            SUITE_TEXT,
            json.dumps({"python": "3.11", "packages": {"numpy": np.__version__}}),
            "2024-05-01T10:00:00+00:00",
            "2024-05-01T10:03:30+00:00",
        ),
    )
    for d_name, d_label, d_spec in datasets:
        n = d_spec.get("n", 150)
        noise = d_spec.get("noise", 0.0)
        for m_name, m_label, m_spec, quality, fragility, power in methods:
            for seed in seeds:
                job_id = hashlib.sha1(f"{d_label}|{m_label}|{seed}".encode()).hexdigest()[:16]
                status, error = "ok", None
                if m_name == "laplacian_eigenmaps" and n == 160 and seed == seeds[-1]:
                    status, error = "timeout", "ran past the 120 s limit <b>after</b> 3 tries"
                fit = 1e-5 * n**power
                q = quality * (1 - fragility * noise) + 0.01 * rng.standard_normal()
                con.execute(
                    "INSERT INTO jobs VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                    (
                        job_id,
                        d_name,
                        d_label,
                        json.dumps({**d_spec, "seed": seed}),
                        m_name,
                        m_label,
                        json.dumps(m_spec),
                        seed,
                        2,
                        status,
                        error,
                        fit,
                        50 + n / 10,
                        n,
                        3 if d_name != "iris" else 4,
                        None,
                        "2024-05-01T10:00:01+00:00",
                        "2024-05-01T10:00:02+00:00",
                        "0.1.0",
                        1,
                    ),
                )
                if status != "ok":
                    continue
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
                if d_name == "iris":
                    scores[("knn_accuracy", 5)] = q
                if m_spec.get("bandwidth") == "median":
                    scores[("bandwidth", 0)] = 1.7
                con.executemany(
                    "INSERT INTO scores VALUES (?,?,?,?)",
                    [(job_id, m, k, float(v)) for (m, k), v in scores.items()],
                )
                np.save(folder / "embeddings" / f"{job_id}.npy", rng.standard_normal((n, 2)))
    con.commit()
    con.close()
    return folder


@pytest.fixture(scope="session")
def write_store() -> Callable[..., Path]:
    """The store writer ``write_store(folder, *, seeds, iris_label, small) -> folder``."""
    return _write_store
