"""Tests for the eigen-solver front: the top-k solvers and the Laplacian solver chain."""

import warnings

import numpy as np
import pytest
import scipy.sparse
from _helpers import assert_allclose_up_to_sign
from numpy.testing import assert_allclose

from lowdim.methods._eigen import (
    SolverFallbackWarning,
    fix_signs,
    smallest_laplacian_eigenpairs,
    top_eigenpairs,
)


def _random_psd(n, rank, seed=0):
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n, rank))
    return A @ A.T + 1e-3 * np.eye(n)


def _path_laplacian(n):
    """Unnormalized Laplacian D - W of the path graph with n nodes."""
    off = -np.ones(n - 1)
    main = np.full(n, 2.0)
    main[[0, -1]] = 1.0
    return scipy.sparse.diags([off, main, off], [-1, 0, 1], format="csr")


def _cycle_laplacian(n):
    W = scipy.sparse.diags([np.ones(n - 1), np.ones(n - 1)], [-1, 1], format="lil")
    W[0, n - 1] = W[n - 1, 0] = 1.0
    W = scipy.sparse.csr_matrix(W)
    return scipy.sparse.diags(np.asarray(W.sum(axis=1)).ravel()) - W


@pytest.mark.parametrize("solver", ["dense", "arpack", "randomized"])
def test_top_eigenpairs_match_numpy_eigh(solver):
    # Outside reference: numpy.linalg.eigh (LAPACK) on the full matrix.
    A = _random_psd(200, 12)
    expected_values, expected_vectors = np.linalg.eigh(A)
    result = top_eigenpairs(A, 4, solver=solver, random_state=0)
    assert result.solver == solver
    assert_allclose(result.values, expected_values[::-1][:4], rtol=1e-6)
    assert_allclose_up_to_sign(result.vectors, expected_vectors[:, ::-1][:, :4], atol=1e-5)


@pytest.mark.parametrize("solver", ["dense", "arpack", "amg"])
def test_path_graph_spectrum_is_known(solver):
    # Exact fact (see scipy.sparse.csgraph.laplacian's tests): the path graph with n nodes has
    # Laplacian eigenvalues 2 - 2 cos(pi m / n) and eigenvectors cos(pi m (i + 1/2) / n).
    n = 400
    L = _path_laplacian(n)
    result = smallest_laplacian_eigenpairs(
        L, 4, null_vector=np.ones(n), solver=solver, random_state=0, tol=1e-9
    )
    assert result.solver == solver
    m = np.arange(4)
    assert_allclose(result.values, 2 - 2 * np.cos(np.pi * m / n), atol=1e-10)
    i = np.arange(n)
    expected = np.cos(np.pi * np.outer(i + 0.5, m) / n)
    expected /= np.linalg.norm(expected, axis=0)
    assert_allclose_up_to_sign(result.vectors, expected, atol=1e-5)


def test_cycle_graph_spectrum_n8():
    # Exact fact: the unweighted cycle of n nodes has eigenvalues 2 - 2 cos(2 pi m / n);
    # for n = 8: 0, 0.5858 x2, 2 x2, 3.4142 x2, 4 (REFERENCES.md, Laplacian eigenmaps).
    result = smallest_laplacian_eigenpairs(_cycle_laplacian(8), 8, solver="dense")
    expected = np.sort(2 - 2 * np.cos(2 * np.pi * np.arange(8) / 8))
    assert_allclose(result.values, expected, atol=1e-12)
    assert_allclose(result.values, [0, 0.5858, 0.5858, 2, 2, 3.4142, 3.4142, 4], atol=1e-4)


def _geometric_laplacian(n=800, k=8, seed=0):
    """Normalized Laplacian of a kNN graph on a rectangle: a non-degenerate low spectrum."""
    from sklearn.neighbors import kneighbors_graph

    rng = np.random.default_rng(seed)
    X = rng.uniform(size=(n, 2)) * [1.0, 0.37]
    W = kneighbors_graph(X, k, include_self=False)
    W = W.maximum(W.T)
    d = np.asarray(W.sum(axis=1)).ravel()
    s = scipy.sparse.diags(1 / np.sqrt(d))
    return scipy.sparse.identity(n) - s @ W @ s, np.sqrt(d)


def test_amg_arpack_and_dense_agree_on_the_same_laplacian():
    # Outside reference: LAPACK's dense eigh (scipy.linalg.eigh) on the same matrix.
    L, null = _geometric_laplacian()
    results = {
        s: smallest_laplacian_eigenpairs(
            L, 5, null_vector=null, solver=s, random_state=0, tol=1e-8
        )
        for s in ("amg", "arpack", "dense")
    }
    dense = results["dense"]
    assert_allclose(dense.values[0], 0.0, atol=1e-12)
    for name in ("amg", "arpack"):
        assert results[name].solver == name
        assert_allclose(results[name].values, dense.values, atol=1e-9)
        assert_allclose_up_to_sign(results[name].vectors, dense.vectors, atol=1e-5)


def test_amg_is_repeatable_and_leaves_the_global_generator_alone():
    L, null = _geometric_laplacian(n=700)
    np.random.seed(123)
    before = np.random.get_state()[1].copy()
    first = smallest_laplacian_eigenpairs(L, 4, null_vector=null, solver="amg", random_state=7)
    assert np.array_equal(np.random.get_state()[1], before)
    np.random.seed(99)  # the result must not depend on numpy's global generator
    second = smallest_laplacian_eigenpairs(L, 4, null_vector=null, solver="amg", random_state=7)
    assert np.array_equal(first.vectors, second.vectors)
    assert np.array_equal(first.values, second.values)


def test_fallback_to_arpack_warns_and_says_why():
    L, null = _geometric_laplacian(n=700)
    with pytest.warns(SolverFallbackWarning, match="did not converge in 1 iterations"):
        result = smallest_laplacian_eigenpairs(
            L, 4, null_vector=null, solver="amg", random_state=0, tol=1e-14, maxiter=1
        )
    assert result.solver == "arpack"
    dense = smallest_laplacian_eigenpairs(L, 4, solver="dense")
    assert_allclose(result.values, dense.values, atol=1e-9)


def test_small_graph_skips_lobpcg_with_a_warning():
    with pytest.warns(SolverFallbackWarning, match="unreliable for 12 nodes"):
        result = smallest_laplacian_eigenpairs(
            _path_laplacian(12), 3, null_vector=np.ones(12), solver="amg", random_state=0
        )
    assert result.solver == "arpack"


def test_auto_uses_dense_for_small_n_without_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = smallest_laplacian_eigenpairs(_path_laplacian(50), 3)
    assert result.solver == "dense"
    assert np.all(np.diff(result.values) >= 0)


def test_bad_arguments_name_the_argument():
    with pytest.raises(ValueError, match="`k` must satisfy 1 <= k <= n = 5, got 0"):
        smallest_laplacian_eigenpairs(_path_laplacian(5), 0)
    with pytest.raises(ValueError, match="`solver` must be one of"):
        smallest_laplacian_eigenpairs(_path_laplacian(5), 2, solver="lapack")


def test_fix_signs_makes_largest_entry_positive():
    V = np.array([[0.1, -0.9], [-0.8, 0.2], [0.3, 0.1]])
    fixed = fix_signs(V.copy())
    assert_allclose(fixed, [[-0.1, 0.9], [0.8, -0.2], [-0.3, -0.1]])
