"""Exact neighbour lists and blocked ranks against a plain stable sort of full distance rows."""

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from lowdim.metrics import _neighbors
from lowdim.metrics._neighbors import knn_lists, neighbour_ranks


def _plain_ranks(Z):
    # Rank 1 = nearest, self excluded, ties to the lower index (REFERENCES.md convention).
    n = len(Z)
    d = ((Z[:, None] - Z[None]) ** 2).sum(-1)
    np.fill_diagonal(d, np.inf)
    order = np.argsort(d, axis=1, kind="stable")
    ranks = np.empty((n, n), int)
    ranks[np.arange(n)[:, None], order] = np.arange(1, n + 1)
    return order, ranks


@pytest.mark.parametrize("d", [1, 3, 20])  # direct differences, kd-tree, brute force with BLAS
def test_lists_and_ranks_match_a_plain_sort_on_lattice_data(d):
    # Integer coordinates give many exactly tied distances, so the tie rule is exercised.
    rng = np.random.default_rng(d)
    Z = rng.integers(0, 3, size=(70, d)).astype(float)
    Z[10] = Z[3]  # and duplicates
    order, ranks = _plain_ranks(Z)
    k = 9
    assert np.array_equal(knn_lists(Z, k), order[:, :k])
    rows = np.array([0, 3, 10, 69])
    given = rng.integers(0, 70, size=(4, 6))
    given[given == rows[:, None]] = 1
    expected = ranks[rows[:, None], given]
    assert np.array_equal(neighbour_ranks(Z, rows, given), expected)


def test_small_blocks_give_the_same_ranks(monkeypatch):
    rng = np.random.default_rng(0)
    Z = rng.normal(size=(90, 6))
    _, ranks = _plain_ranks(Z)
    nb = knn_lists(Z, 12)
    monkeypatch.setattr(_neighbors, "BLOCK_ELEMENTS", 500)  # many tiny blocks
    got = neighbour_ranks(Z, np.arange(90), nb)
    assert np.array_equal(got, ranks[np.arange(90)[:, None], nb])
    assert np.array_equal(got, np.tile(np.arange(1, 13), (90, 1)))


def test_every_neighbour_list_length_up_to_n_minus_1():
    Z = np.random.default_rng(1).normal(size=(12, 2))
    order, _ = _plain_ranks(Z)
    for k in (1, 10, 11):
        assert np.array_equal(knn_lists(Z, k), order[:, :k])


def test_results_do_not_depend_on_the_number_of_threads():
    from lowdim.metrics import score_embedding

    rng = np.random.default_rng(2)
    X = rng.normal(size=(300, 30))  # wide enough for the BLAS path
    Y = X[:, :2] + 0.1 * rng.normal(size=(300, 2))
    with threadpool_limits(limits=1):
        one = score_embedding(X, Y, ks=(5, 10)).values
    with threadpool_limits(limits=2):
        two = score_embedding(X, Y, ks=(5, 10)).values
    assert one == two


def test_distances_equal_in_float32_but_not_in_float64_are_ranked_exactly():
    # 1 + 1e-12 and 1 round to the same float32: the counts must fall back to float64.
    Z = np.array([0.0, 1 + 2e-12, 1.0, 3.0, 1 + 1e-12, -1.0, 2.0, 5.0])[:, None]
    order, ranks = _plain_ranks(Z)
    rows = np.arange(len(Z))
    given = order[:, :5]
    assert np.array_equal(neighbour_ranks(Z, rows, given), ranks[rows[:, None], given])
    assert np.array_equal(neighbour_ranks(Z, rows, given), np.tile(np.arange(1, 6), (8, 1)))


@pytest.mark.parametrize(
    "n, K, lattice",
    [(200, 3, True), (200, 40, True), (200, 40, False), (1300, 30, False), (1300, 30, True)],
)
def test_every_counting_path_matches_a_plain_sort(n, K, lattice):
    # Few thresholds are compared directly, many against sorted rows (one search for narrow
    # rows, one a row for wide ones); random neighbours make rows as wide as they get.
    rng = np.random.default_rng(n + K)
    Z = rng.integers(0, 4, size=(n, 3)).astype(float) if lattice else rng.normal(size=(n, 6))
    _, ranks = _plain_ranks(Z)
    rows = np.sort(rng.choice(n, size=40, replace=False))
    given = np.array([rng.choice(np.delete(np.arange(n), r), size=K, replace=False) for r in rows])
    assert np.array_equal(neighbour_ranks(Z, rows, given), ranks[rows[:, None], given])
    near = knn_lists(Z, K)[rows]
    assert np.array_equal(neighbour_ranks(Z, rows, near), ranks[rows[:, None], near])
