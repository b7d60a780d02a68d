"""Density warping and the ambient lift."""

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats
from scipy.spatial.distance import pdist

from lowdim.datasets import load
from lowdim.datasets.lift import lift, random_isometry, warp_uniform


def test_zero_density_is_the_identity():
    u = np.linspace(0, 1, 11)
    assert_array_equal(warp_uniform(u, 0.0), u)


@pytest.mark.parametrize("a", [2.0, -3.0, 8.0])
def test_warp_is_the_inverse_cdf_of_the_truncated_exponential(a):
    # Exact: F(x) = (exp(a x) - 1) / (exp(a) - 1), so F(warp(u)) = u and warp keeps [0, 1].
    u = np.linspace(0, 1, 101)
    x = warp_uniform(u, a)
    assert_allclose(np.expm1(a * x) / np.expm1(a), u, atol=1e-12)
    assert x[0] == 0 and abs(x[-1] - 1) < 1e-12 and np.all(np.diff(x) > 0)
    sample = warp_uniform(np.random.default_rng(0).uniform(size=5000), a)
    assert stats.kstest(sample, lambda v: np.expm1(a * v) / np.expm1(a)).pvalue > 0.01


def test_density_ratio_between_the_ends_is_exp_density():
    # The documented law: the density at the end is exp(density) times that at the start.
    a = 1.5
    sample = warp_uniform(np.random.default_rng(1).uniform(size=200_000), a)
    low, high = np.mean(sample < 0.05), np.mean(sample > 0.95)
    # Exact: the bins [0.95, 1] and [0, 0.05] hold masses in the ratio exp(0.95 a).
    assert_allclose(high / low, np.exp(a * 0.95), rtol=0.05)


def test_random_isometry_has_orthonormal_columns():
    Q = random_isometry(np.random.default_rng(0), 3, 20)
    assert Q.shape == (20, 3)
    assert_allclose(Q.T @ Q, np.eye(3), atol=1e-12)


def test_lift_keeps_pairwise_distances():
    X = np.random.default_rng(2).normal(size=(50, 3))
    lifted = lift(X, 12, np.random.default_rng(3))
    assert lifted.shape == (50, 12)
    assert_allclose(pdist(lifted), pdist(X), rtol=1e-10)
    assert lift(X, None, np.random.default_rng(3)) is X


@pytest.mark.parametrize("name", ["swiss_roll", "two_moons", "torus"])
def test_ambient_dim_keeps_the_manifold_and_its_distances(name):
    # Noise-free data lifted to 30 dimensions: an isometry, and the same points (the lift
    # draws from its own random stream).
    flat = load({"name": name, "n": 200, "seed": 7})
    high = load({"name": name, "n": 200, "seed": 7, "ambient_dim": 30})
    assert high.X.shape == (200, 30)
    assert_allclose(pdist(high.X), pdist(flat.X), rtol=1e-9, atol=1e-12)
    assert_array_equal(high.truth, flat.truth)
    # A rotation, not a padding with zeros: every ambient coordinate varies.
    assert np.all(high.X.std(axis=0) > 0)
