"""Memory floors: suites that cannot fit are refused before anything runs, with the estimate."""

from __future__ import annotations

import pytest

from lowdim.run.estimates import check_memory, memory_floor
from lowdim.run.runner import run_suite
from lowdim.run.suites import suite_from_dict


def jobs_of(methods: list[dict], n: int, memory: str = "1GB") -> list:
    data = {
        "suite": {"name": "e", "memory_limit": memory, "metrics": ["trustworthiness"]},
        "datasets": [{"name": "swiss_roll", "n": n}],
        "methods": methods,
    }
    return suite_from_dict(data, source="e.toml").jobs()


def test_floors_are_the_one_array_each_family_cannot_do_without():
    n = 20_000
    kernel, landmark, graph, diffusion, pca, peer = jobs_of(
        [
            {"name": "kernel_pca"},
            {"name": "classical_mds", "n_landmarks": 500},
            {"name": "laplacian_eigenmaps", "n_neighbors": 12},
            {"name": "diffusion_maps", "n_neighbors": 15},
            {"name": "pca"},
            {"import": "sklearn.decomposition:PCA"},
        ],
        n,
    )
    data = 8 * n * 2
    # exact byte counts: float64 = 8 bytes, int32 index = 4 bytes
    assert memory_floor(kernel).bytes == data + 8 * n * n
    assert memory_floor(landmark).bytes == data + 8 * (500 * 500 + n * 2)
    assert memory_floor(graph).bytes == data + 12 * n * 12
    assert memory_floor(diffusion).bytes == data + 12 * n * 15
    assert memory_floor(pca).bytes == data
    assert memory_floor(peer) is None  # an imported peer runs and stops at the limit


def test_a_dense_method_at_an_n_that_cannot_fit_is_refused_with_the_estimate(tmp_path):
    jobs = jobs_of([{"name": "pca"}, {"name": "kernel_pca"}], 100_000, memory="4GB")
    with pytest.raises(ValueError) as caught:
        check_memory(jobs, "e.toml")
    # 100,000**2 * 8 bytes = 74.5 GB (exact arithmetic)
    assert str(caught.value) == (
        "e.toml: kernel_pca on swiss_roll(n=100000) cannot fit: its 100,000 x 100,000 matrix "
        "alone needs about 74.5 GB (estimate), over the memory_limit of 4.0 GB; raise "
        "`memory_limit`, lower `n` or use landmarks"
    )
    data = {
        "suite": {"name": "e", "memory_limit": "4GB"},
        "datasets": [{"name": "swiss_roll", "n": 100_000}],
        "methods": [{"name": "kernel_pca"}],
    }
    with pytest.raises(ValueError, match="cannot fit"):
        run_suite(suite_from_dict(data, source="e.toml"), tmp_path / "none", quiet=True)
    assert not (tmp_path / "none").exists()


def test_scalable_methods_at_a_million_points_fit_in_a_few_gigabytes():
    jobs = jobs_of(
        [
            {"name": "pca"},
            {"name": "classical_mds", "n_landmarks": 1000},
            {"name": "kernel_pca", "n_landmarks": 1000},
            {"name": "laplacian_eigenmaps", "n_neighbors": 10},
            {"name": "diffusion_maps", "n_neighbors": 15},
        ],
        1_000_000,
        memory="4GB",
    )
    check_memory(jobs)  # nothing raised
