"""Every ready suite in suites/ validates and expands; the smoke suite actually runs."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from lowdim.run.runner import run_suite
from lowdim.run.store import Store
from lowdim.run.suites import load_suite, suite_from_dict

SUITES = Path(__file__).resolve().parents[2] / "suites"
READY = ["smoke", "quick", "classic", "bandwidth", "stress", "scaling", "replication"]


@pytest.mark.parametrize("name", READY)
def test_ready_suite_validates_and_expands(name):
    suite = load_suite(SUITES / f"{name}.toml")
    assert suite.name == name
    jobs = suite.jobs()
    assert len(jobs) == len(suite.datasets) * len(suite.methods) * len(suite.seeds)
    assert len({j.job_id for j in jobs}) == len(jobs)
    pairs = {(j.dataset_label, j.method_label, j.seed) for j in jobs}
    assert len(pairs) == len(jobs)  # display labels tell every job apart


def test_scaling_suite_spans_1000_to_a_million_with_scikit_learn_peers():
    suite = load_suite(SUITES / "scaling.toml")
    sizes = sorted({e.spec["n"] for e in suite.datasets})
    assert sizes[0] == 1000 and sizes[-1] == 1_000_000
    scalable = {e.spec.get("name") for e in suite.methods} - {None}
    assert scalable == {
        "pca", "classical_mds", "kernel_pca", "laplacian_eigenmaps", "diffusion_maps"
    }  # fmt: skip
    # load_suite passed its memory check: every method there fits its memory limit at a
    # million points by the estimate; the peers then stop at the limits, recorded as such
    peers = {e.spec.get("import") for e in suite.methods} - {None}
    assert peers == {
        "sklearn.decomposition:PCA",
        "sklearn.manifold:SpectralEmbedding",
        "sklearn.decomposition:KernelPCA",
        "sklearn.manifold:ClassicalMDS",
    }


def test_replication_suite_follows_the_published_protocol():
    # van der Maaten, Postma & van den Herik, TiCC TR 2009-005: four artificial sets of 5,000
    # points, 1-NN error, T(12) and C(12); LE k = 5..15, diffusion maps t = 10..100.
    suite = load_suite(SUITES / "replication.toml")
    assert {e.spec["name"] for e in suite.datasets} == {
        "swiss_roll",
        "coiled_ring",
        "peaked_sheet",
        "swiss_gap",
    }
    assert {e.spec["n"] for e in suite.datasets} == {5000}
    assert set(suite.metrics) == {"knn_accuracy", "trustworthiness", "continuity"}
    assert {1, 12} <= set(suite.neighbors)
    k_grid = sorted(e.spec["n_neighbors"] for e in suite.methods if "n_neighbors" in e.spec)
    assert k_grid[0] == 5 and k_grid[-1] == 15
    times = sorted(e.spec["diffusion_time"] for e in suite.methods if "diffusion_time" in e.spec)
    assert times[0] == 10 and times[-1] == 100


def test_smoke_suite_runs(tmp_path):
    suite = load_suite(SUITES / "smoke.toml")
    summary = run_suite(suite, tmp_path, n_jobs=1, quiet=True)
    assert summary.counts == {"ok": len(suite.jobs())}
    with Store(tmp_path) as store:
        assert store.integrity() == "ok"
    with Store(tmp_path) as store:
        scores = list(store.score_rows())
    trust = [v for _, _, _, _, m, _, v in scores if m == "trustworthiness"]
    assert len(trust) == len(suite.jobs()) * len(suite.neighbors)
    # trustworthiness lies in [0, 1] for k < n/2 (Venna & Kaski 2001)
    assert all(0.0 <= t <= 1.0 for t in trust)


@pytest.mark.parametrize("name", ["classic", "replication"])
def test_every_dataset_of_a_suite_with_generated_families_runs(name, tmp_path):
    # Each [[datasets]] table as written (shape, parameters, labels), only smaller, with PCA:
    # every family the suite names must load, fit and score.
    data = tomllib.loads((SUITES / f"{name}.toml").read_text())
    for table in data["datasets"]:
        if "n" in table:
            table["n"] = 200
    data["suite"]["seeds"] = [0]
    data["methods"] = [{"name": "pca"}]
    suite = suite_from_dict(data, source=str(SUITES / f"{name}.toml"))
    summary = run_suite(suite, tmp_path, n_jobs=1, quiet=True)
    assert summary.counts == {"ok": len(suite.datasets)}
