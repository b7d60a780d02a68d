"""Kernel functions and bandwidth rules against scikit-learn, scipy and naive oracles."""

import numpy as np
import pytest
import scipy.sparse
from numpy.testing import assert_allclose
from scipy.spatial.distance import cdist, pdist
from sklearn.metrics import pairwise

from lowdim.errors import InputError
from lowdim.methods._kernels import (
    Bandwidth,
    cosine_kernel,
    laplacian_from_distances,
    laplacian_kernel,
    linear_kernel,
    polynomial_kernel,
    query_local_scales,
    rbf_from_distances,
    rbf_kernel,
    rbf_kernel_upper,
    resolve_bandwidth,
    squared_distances,
)


@pytest.fixture
def blocks():
    rng = np.random.default_rng(0)
    return rng.normal(size=(40, 4)), rng.normal(size=(25, 4))


def test_squared_distances_match_scipy(blocks):
    X, Y = blocks
    # scipy.spatial.distance.cdist is the reference
    assert_allclose(squared_distances(X, Y), cdist(X, Y, "sqeuclidean"), atol=1e-12)
    D = squared_distances(X)
    assert np.all(np.diag(D) == 0.0) and np.all(D >= 0.0)


def test_kernels_match_scikit_learn(blocks):
    X, Y = blocks
    # sklearn.metrics.pairwise is the reference for every kernel formula
    assert_allclose(linear_kernel(X, Y), pairwise.linear_kernel(X, Y))
    assert_allclose(rbf_kernel(X, Y, gamma=0.3), pairwise.rbf_kernel(X, Y, gamma=0.3))
    assert_allclose(
        polynomial_kernel(X, Y, gamma=0.5, degree=3, coef0=2.0),
        pairwise.polynomial_kernel(X, Y, gamma=0.5, degree=3, coef0=2.0),
    )
    assert_allclose(laplacian_kernel(X, Y, gamma=0.2), pairwise.laplacian_kernel(X, Y, gamma=0.2))
    Z = np.vstack([X[:3], np.zeros((1, 4))])
    assert_allclose(cosine_kernel(Z, Y), pairwise.cosine_similarity(Z, Y), atol=1e-12)


def test_rbf_upper_triangle_matches_scikit_learn():
    X = np.random.default_rng(3).normal(size=(300, 5))
    K = rbf_kernel_upper(X, gamma=0.3, block_rows=64)
    # sklearn.metrics.pairwise.rbf_kernel is the reference; below the diagonal stays 0
    assert_allclose(K, np.triu(pairwise.rbf_kernel(X, gamma=0.3)), atol=1e-14)
    assert np.all(np.tril(K, k=-1) == 0.0)


def test_rbf_from_distances_uses_sigma_convention(blocks):
    X, Y = blocks
    sigma = 1.3
    # REFERENCES.md conventions: exp(-d^2 / (2 sigma^2)) is scikit-learn's gamma = 1/(2 sigma^2)
    W = rbf_from_distances(squared_distances(X, Y), Bandwidth(sigma))
    assert_allclose(W, pairwise.rbf_kernel(X, Y, gamma=1 / (2 * sigma**2)), atol=1e-12)


def test_local_scales_formula_dense_sparse_and_values(blocks):
    X, _ = blocks
    bw = resolve_bandwidth("local:5", X)
    D2 = squared_distances(X)
    # Zelnik-Manor & Perona (2004): exp(-d_ij^2 / (2 sigma_i sigma_j)), naive oracle
    oracle = np.exp(-D2 / (2 * np.outer(bw.local, bw.local)))
    assert_allclose(rbf_from_distances(D2, bw), oracle)
    rows, cols = np.nonzero(D2 < np.median(D2))
    values = rbf_from_distances(D2[rows, cols], bw, rows, cols)
    assert_allclose(values, oracle[rows, cols])
    sparse = scipy.sparse.csr_matrix((D2[rows, cols], (rows, cols)), shape=D2.shape)
    weights = rbf_from_distances(sparse, bw)
    assert scipy.sparse.issparse(weights)
    assert_allclose(weights.toarray()[rows, cols], oracle[rows, cols])
    block = rbf_from_distances(D2[5:9, 10:20], bw, np.arange(5, 9), np.arange(10, 20))
    assert_allclose(block, oracle[5:9, 10:20])


def test_laplacian_from_distances_matches_scikit_learn(blocks):
    X, Y = blocks
    # exp(-|x - y|_1 / sigma) is sklearn's laplacian_kernel with gamma = 1 / sigma
    W = laplacian_from_distances(cdist(X, Y, "cityblock"), Bandwidth(2.0, metric="manhattan"))
    assert_allclose(W, pairwise.laplacian_kernel(X, Y, gamma=0.5))


def test_median_rule_exact_and_sampled():
    rng = np.random.default_rng(1)
    X = rng.normal(size=(300, 3))
    # common practice: sigma = median pairwise distance (REFERENCES.md, bandwidth rules)
    assert resolve_bandwidth("median", X).sigma == pytest.approx(np.median(pdist(X)))
    assert resolve_bandwidth("MEDIAN", X).rule == "median"
    big = rng.normal(size=(5000, 3))
    a = resolve_bandwidth("median", big, random_state=3).sigma
    b = resolve_bandwidth("median", big, random_state=3).sigma
    assert a == b
    exact = np.median(pdist(big[:4000]))
    assert a == pytest.approx(exact, rel=0.03)


def test_local_rule_is_kth_neighbour_distance():
    rng = np.random.default_rng(2)
    X = rng.normal(size=(120, 3))
    D = cdist(X, X)
    np.fill_diagonal(D, np.inf)
    ordered = np.sort(D, axis=1)
    bw = resolve_bandwidth("local", X)
    # Zelnik-Manor & Perona (2004): K = 7, the point itself excluded
    assert bw.rule == "local:7" and bw.local_k == 7
    assert_allclose(bw.local, ordered[:, 6])
    assert bw.sigma == pytest.approx(np.median(ordered[:, 6]))
    fake = ordered[:, :10] * 2.0  # a graph's own neighbour table is read, not recomputed
    assert_allclose(resolve_bandwidth("local:3", X, knn_distances=fake).local, fake[:, 2])
    assert_allclose(resolve_bandwidth("local:12", X, knn_distances=fake).local, ordered[:, 11])


def test_query_local_scales_reproduce_training_scales():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(80, 2))
    bw = resolve_bandwidth("local:4", X)
    assert_allclose(query_local_scales(X, X, bw), bw.local)
    new = rng.normal(size=(5, 2))
    assert_allclose(query_local_scales(X, new, bw), np.sort(cdist(new, X), axis=1)[:, 3])


def _naive_kernel_sum(X):
    d2 = pdist(X, "sqeuclidean")  # L = n + 2 sum_{i<j} exp(-d_ij^2 / eps)
    eps = np.geomspace(d2.min() / 10, d2.max() * 10, 300)
    L = np.array([len(X) + 2 * np.exp(-d2 / e).sum() for e in eps])
    slope = np.gradient(np.log(L), np.log(eps))
    return eps[np.argmax(slope)], slope.max()


@pytest.mark.parametrize("dim", [1, 2])
def test_kernel_sum_rule_against_naive_oracle_and_dimension(dim):
    rng = np.random.default_rng(4)
    flat = rng.uniform(size=(300, dim))
    X = np.hstack([flat, np.zeros((300, 2))]) @ np.linalg.qr(rng.normal(size=(dim + 2,) * 2))[0]
    bw = resolve_bandwidth("kernel_sum", X, random_state=0)
    eps, slope = _naive_kernel_sum(X)
    # Coifman, Shkolnisky, Sigworth & Singer (2008): eps at the steepest log-log slope, and
    # eps = 2 sigma^2 (REFERENCES.md conventions); the oracle sums the dense kernel directly
    assert 2 * bw.sigma**2 == pytest.approx(eps, rel=0.1)
    assert bw.dimension == pytest.approx(2 * slope, rel=0.02)
    # L grows like eps^(d/2) (Singer 2006): 2 x slope estimates the intrinsic dimension
    assert abs(bw.dimension - dim) < 0.5 * dim


def test_kernel_sum_sampled_for_large_n():
    rng = np.random.default_rng(5)
    X = np.hstack([rng.uniform(size=(6000, 2)), np.zeros((6000, 1))])
    bw = resolve_bandwidth("kernel_sum", X, random_state=0)
    assert bw.rule == "kernel_sum" and 1.5 < bw.dimension < 2.6


@pytest.mark.parametrize(
    "value, text",
    [
        (0.0, "got 0.0"),
        (-1.0, "got -1.0"),
        ("locale", "got 'locale' (did you mean 'local'?)"),
        ("local:0", "got 'local:0'"),
        ("mean", "got 'mean'"),
    ],
)
def test_bad_bandwidth_is_named(value, text):
    X = np.random.default_rng(0).normal(size=(20, 2))
    with pytest.raises(InputError) as info:
        resolve_bandwidth(value, X, owner="DiffusionMaps")
    message = str(info.value)
    assert message.startswith("the parameter `bandwidth` of `DiffusionMaps` must be a number")
    assert "'median'" in message and "'local:K'" in message and text in message


def test_local_k_too_large_and_duplicates():
    X = np.random.default_rng(0).normal(size=(10, 2))
    with pytest.raises(InputError, match=r"K in \[1, n_samples - 1\] = \[1, 9\].*'local:10'"):
        resolve_bandwidth("local:10", X, owner="KernelPCA")
    dup = np.repeat(X, 3, axis=0)
    with pytest.raises(InputError, match="exact duplicates"):
        resolve_bandwidth("local:2", dup)
    with pytest.raises(InputError, match="median pairwise distance is 0"):
        resolve_bandwidth("median", np.zeros((10, 2)))
    with pytest.raises(InputError, match="Euclidean distances only"):
        resolve_bandwidth("kernel_sum", X, metric="manhattan")


def test_underflowing_bandwidth_is_an_error():
    X = np.random.default_rng(0).normal(size=(30, 2))
    D2 = squared_distances(X)
    with pytest.raises(InputError) as info:
        rbf_from_distances(D2, Bandwidth(1e-3), check_owner="KernelPCA")
    message = str(info.value)
    assert "`bandwidth` of `KernelPCA`" in message and "0.001" in message
    assert "'median'" in message and "30 of 30 points" in message
    rows, cols = np.nonzero(~np.eye(30, dtype=bool))
    sparse = scipy.sparse.csr_matrix((D2[rows, cols], (rows, cols)), shape=D2.shape)
    with pytest.raises(InputError, match="too small"):
        rbf_from_distances(sparse, Bandwidth(1e-3), check_owner="LaplacianEigenmaps")
    weights = rbf_from_distances(sparse, Bandwidth(1.0), check_owner="LaplacianEigenmaps")
    assert weights.nnz == sparse.nnz
