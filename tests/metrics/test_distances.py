"""Spearman correlation of distances and scale-invariant stress."""

import numpy as np
import pytest
from scipy.spatial.distance import pdist
from scipy.stats import spearmanr

from lowdim.metrics import distance_spearman, stress, stress_parts
from lowdim.metrics.distances import average_ranks


def test_distance_spearman_equals_scipy():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(80, 5))
    Y = X[:, :2] + 0.5 * rng.normal(size=(80, 2))
    # Source: scipy.stats.spearmanr on scipy.spatial.distance.pdist.
    expected = spearmanr(pdist(X), pdist(Y)).statistic
    assert distance_spearman(X, Y) == pytest.approx(expected, abs=1e-12)


def test_distance_spearman_with_tied_distances_equals_scipy():
    rng = np.random.default_rng(1)
    X = rng.integers(0, 4, size=(40, 3)).astype(float)
    Y = rng.integers(0, 3, size=(40, 2)).astype(float)
    # Source: scipy.stats.spearmanr (average ranks for ties).
    expected = spearmanr(pdist(X), pdist(Y)).statistic
    assert distance_spearman(X, Y) == pytest.approx(expected, abs=1e-12)


def test_average_ranks_example():
    # Worked by hand: ties share the mean of the ranks they span (common practice).
    assert average_ranks(np.array([3.0, 1.0, 3.0, 2.0])).tolist() == [3.5, 1.0, 3.5, 2.0]


def test_stress_check_values():
    Z = np.random.default_rng(0).normal(size=(200, 5))
    Y = 7 * Z[:, :2]
    parts = stress_parts(Z, Y)
    # Source: REFERENCES.md [computed], Smelser, Miller & Kobourov 2024 formula:
    # alpha* = 0.2210, SNS = 0.1401, NS(1) = 10.82.
    assert round(parts.optimal_scale, 4) == 0.2210
    assert round(parts.scale_invariant, 4) == 0.1401
    assert round(parts.raw, 2) == 10.82
    assert stress(Z, Y) == parts.scale_invariant


def test_stress_ignores_scale_and_vanishes_for_an_isometry():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(50, 2))
    Y = X[:, :2] + 0.2 * rng.normal(size=(50, 2))
    # Scale invariance and 0 for proportional distances: Smelser, Miller & Kobourov 2024.
    assert stress(X, 1000 * Y) == pytest.approx(stress(X, Y), abs=1e-12)
    assert stress(X, 0.001 * Y) == pytest.approx(stress(X, Y), abs=1e-12)
    rotation = np.array([[0.6, -0.8], [0.8, 0.6]])
    assert stress(X, X @ rotation + 3.0) == pytest.approx(0.0, abs=1e-12)
    assert 0.0 < stress(X, Y) < 1.0


def test_pair_criteria_use_a_subset_for_large_n():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(300, 3))
    Y = X[:, :2]
    full = distance_spearman(X, Y)
    part = distance_spearman(X, Y, pair_points=120)
    assert part != full
    assert abs(part - full) < 0.05
