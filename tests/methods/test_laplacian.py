"""Tests for LaplacianEigenmaps against scikit-learn and exact spectral facts."""

import numpy as np
import pytest
from _helpers import assert_allclose_up_to_sign
from numpy.testing import assert_allclose
from sklearn.datasets import make_swiss_roll
from sklearn.manifold import SpectralEmbedding

from lowdim.errors import InputError
from lowdim.methods._graphs import DisconnectedGraphWarning
from lowdim.methods.laplacian import LaplacianEigenmaps


def canonical_correlations(A, B):
    """Cosines of the principal angles between the centred column spaces of A and B."""
    qa, _ = np.linalg.qr(A - A.mean(axis=0))
    qb, _ = np.linalg.qr(B - B.mean(axis=0))
    return np.linalg.svd(qa.T @ qb, compute_uv=False)


def circle(n):
    theta = 2 * np.pi * np.arange(n) / n
    return np.c_[np.cos(theta), np.sin(theta)]


@pytest.fixture(scope="module")
def roll():
    X, t = make_swiss_roll(800, noise=0.05, random_state=0)
    return X


def test_matches_scikit_learn_spectral_embedding_on_a_swiss_roll(roll):
    # Outside reference: sklearn.manifold.SpectralEmbedding (a kNN connectivity graph, the
    # random-walk eigenvectors); the two 2-D embeddings span the same space.
    ours = LaplacianEigenmaps(n_neighbors=10, weights="binary", random_state=0).fit_transform(roll)
    theirs = SpectralEmbedding(
        n_components=2, affinity="nearest_neighbors", n_neighbors=10, random_state=0
    ).fit_transform(roll)
    assert np.all(canonical_correlations(ours, theirs) > 0.99)


def test_random_walk_solves_the_generalized_problem_of_belkin_and_niyogi(roll):
    # Belkin & Niyogi (2003): (D - W) f = lambda D f on the symmetrised kNN graph with heat
    # weights, solved here naively with scipy.linalg.eigh(L, D) (D-normalized vectors).
    import scipy.linalg
    from sklearn.neighbors import kneighbors_graph

    X, sigma = roll[:300], 2.0
    A = kneighbors_graph(X, 8, mode="distance").toarray()
    W = np.where(A > 0, np.exp(-(A**2) / (2 * sigma**2)), 0.0)
    W = np.maximum(W, W.T)
    D = np.diag(W.sum(axis=1))
    values, vectors = scipy.linalg.eigh(D - W, D, subset_by_index=(0, 2))
    model = LaplacianEigenmaps(n_neighbors=8, bandwidth=sigma).fit(X)
    assert_allclose(model.eigenvalues_, values[1:], rtol=1e-9, atol=1e-12)
    assert_allclose_up_to_sign(model.embedding_, vectors[:, 1:], atol=1e-8)


@pytest.mark.parametrize("normalization", ["random_walk", "symmetric", "unnormalized"])
def test_circle_gives_the_first_fourier_pair(normalization):
    # Exact fact: equally spaced points on a circle make a circulant graph whose first
    # non-constant eigenvectors are cos(theta) and sin(theta) (REFERENCES.md).
    X = circle(60)
    model = LaplacianEigenmaps(n_neighbors=4, bandwidth=0.2, normalization=normalization)
    Y = model.fit_transform(X)
    assert_allclose(canonical_correlations(Y, X), 1.0, atol=1e-10)
    assert_allclose(model.eigenvalues_[0], model.eigenvalues_[1], rtol=1e-8)


def test_cycle_graph_spectrum():
    # Exact fact: the unweighted cycle of n = 8 nodes has Laplacian eigenvalues
    # 2 - 2 cos(2 pi m / 8): 0, 0.5858 x2, 2 x2, 3.4142 x2, 4 (REFERENCES.md). Eight points
    # on a circle with 2 neighbours each and binary weights are that cycle.
    model = LaplacianEigenmaps(
        n_components=7, n_neighbors=2, weights="binary", normalization="unnormalized"
    ).fit(circle(8))
    assert_allclose(model.eigenvalues_, [0.5858, 0.5858, 2, 2, 3.4142, 3.4142, 4], atol=1e-4)
    assert_allclose(model.eigenvalues_, np.sort(2 - 2 * np.cos(2 * np.pi * np.arange(1, 8) / 8)))


def two_triangles():
    tri = np.array([[0.0, 0.0], [1.0, 0.0], [0.5, 0.8]])
    return np.vstack([tri, tri + 100.0])


def test_two_cliques_give_zero_twice_and_warn_with_sizes():
    # Exact fact (REFERENCES.md): two 3-cliques have normalized Laplacian eigenvalues
    # 0, 0, 1.5 (x4); the first 0 is dropped as the constant vector.
    model = LaplacianEigenmaps(n_components=5, n_neighbors=2, weights="binary")
    with pytest.warns(DisconnectedGraphWarning, match=r"2 connected components \(sizes 3, 3\)"):
        model.fit(two_triangles())
    assert model.n_connected_components_ == 2
    assert_allclose(model.eigenvalues_, [0, 1.5, 1.5, 1.5, 1.5], atol=1e-12)
    with pytest.raises(InputError, match="2 connected components.*raise `n_neighbors`"):
        LaplacianEigenmaps(n_neighbors=2, on_disconnected="raise").fit(two_triangles())


def test_largest_component_policy_keeps_one_finite_row_per_point():
    rng = np.random.default_rng(1)
    big, small = rng.normal(size=(40, 2)), rng.normal(size=(8, 2)) + 50.0
    X = np.vstack([small, big])
    model = LaplacianEigenmaps(n_neighbors=5, on_disconnected="largest", eigen_solver="dense")
    with pytest.warns(DisconnectedGraphWarning, match="largest component \\(40 points\\)"):
        Y = model.fit_transform(X)
    assert Y.shape == (48, 2) and np.all(np.isfinite(Y))
    assert np.array_equal(model.excluded_, np.arange(8))
    alone = LaplacianEigenmaps(n_neighbors=5, eigen_solver="dense").fit(big)
    assert_allclose(Y[8:], alone.embedding_, atol=1e-10)
    assert_allclose(Y[:8], alone.transform(small), atol=1e-10)


@pytest.mark.parametrize("graph", ["knn", "mutual_knn", "epsilon"])
@pytest.mark.parametrize("normalization", ["random_walk", "symmetric", "unnormalized"])
def test_nystrom_is_exact_on_training_points(roll, graph, normalization):
    # Exact fact: the Nyström extension of an eigenvector reproduces it on the training
    # points (Belkin & Niyogi's generalized eigen-equation, row by row).
    model = LaplacianEigenmaps(
        graph=graph,
        n_neighbors=12,
        radius=4.0,
        normalization=normalization,
        eigen_solver="dense",
        on_disconnected="largest",
    )
    with np.errstate(all="raise"):
        model.fit(roll[:500])
    assert_allclose(model.transform(roll[:500]), model.embedding_, atol=1e-9)


def test_new_points_fall_between_their_neighbours():
    X = circle(80)
    model = LaplacianEigenmaps(n_neighbors=4, bandwidth=0.2, eigen_solver="dense").fit(X)
    half = np.pi / 80
    between = np.c_[
        np.cos(2 * np.pi * np.arange(80) / 80 + half),
        np.sin(2 * np.pi * np.arange(80) / 80 + half),
    ]
    Y = model.transform(between)
    neighbours = (model.embedding_ + np.roll(model.embedding_, -1, axis=0)) / 2
    assert_allclose(Y, neighbours, atol=0.02 * np.abs(model.embedding_).max())


def test_amg_and_dense_solvers_give_the_same_embedding(roll):
    # Outside reference: LAPACK's dense eigh on the same Laplacian.
    dense = LaplacianEigenmaps(eigen_solver="dense", random_state=0).fit(roll)
    amg = LaplacianEigenmaps(eigen_solver="amg", random_state=0).fit(roll)
    assert (dense.solver_, amg.solver_) == ("dense", "amg")
    assert_allclose(amg.eigenvalues_, dense.eigenvalues_, rtol=1e-4)
    assert_allclose_up_to_sign(amg.embedding_, dense.embedding_, atol=1e-3)
    again = LaplacianEigenmaps(eigen_solver="amg", random_state=0).fit(roll)
    assert np.array_equal(again.embedding_, amg.embedding_)


def test_fitted_attributes(roll):
    model = LaplacianEigenmaps(n_components=3, bandwidth="local:5").fit(roll)
    assert model.embedding_.shape == (800, 3)
    assert model.n_components_ == 3 and model.n_features_in_ == 3
    assert model.n_neighbors_ == 10 and model.n_connected_components_ == 1
    assert model.bandwidth_rule_ == "local:5" and model.bandwidth_ > 0
    assert model.solver_ == "amg" and model.excluded_.size == 0
    assert np.all(np.diff(model.eigenvalues_) >= 0)
    binary = LaplacianEigenmaps(weights="binary").fit(roll)
    assert binary.bandwidth_ is None


X_OK = np.random.default_rng(0).normal(size=(20, 3))


@pytest.mark.parametrize(
    "params, message",
    [
        (
            {"n_neighbors": 0},
            "the parameter `n_neighbors` of `LaplacianEigenmaps` must be None "
            "or an int in [1, n_samples - 1], got 0",
        ),
        (
            {"n_neighbors": 20},
            "`n_neighbors` of `LaplacianEigenmaps` must be None or an int in "
            "[1, n_samples - 1], got 20",
        ),
        (
            {"n_components": 20},
            "`n_components` of `LaplacianEigenmaps` must be an int in [1, n_samples - 1], got 20",
        ),
        (
            {"graph": "knnn"},
            "`graph` of `LaplacianEigenmaps` must be one of 'knn', "
            "'mutual_knn', 'epsilon', got 'knnn' (did you mean 'knn'?)",
        ),
        (
            {"weights": "gauss"},
            "`weights` of `LaplacianEigenmaps` must be one of 'heat', 'binary', got 'gauss'",
        ),
        ({"normalization": "rw"}, "`normalization` of `LaplacianEigenmaps` must be one of"),
        ({"bandwidth": "mean"}, "`bandwidth` of `LaplacianEigenmaps` must be"),
        ({"bandwidth": -1.0}, "`bandwidth` of `LaplacianEigenmaps` must be a number in (0, inf)"),
        ({"bandwidth": 1e-10}, "`bandwidth` of `LaplacianEigenmaps` is too small for this data"),
        (
            {"graph": "epsilon"},
            "`radius` of `LaplacianEigenmaps` must be a positive number "
            "when graph='epsilon', got None",
        ),
        ({"graph": "epsilon", "radius": 1e-3}, "have no neighbour within radius=0.001"),
        ({"on_disconnected": "drop"}, "`on_disconnected` of `LaplacianEigenmaps` must be one of"),
    ],
)
def test_bad_parameters_raise_worded_errors(params, message):
    with pytest.raises(InputError) as info:
        LaplacianEigenmaps(**params).fit(X_OK)
    assert message in str(info.value)


@pytest.mark.parametrize(
    "X, message",
    [
        (np.array([[0.0, 1.0], [np.nan, 2.0], [1.0, 1.0]]), "contains NaN or infinity"),
        (np.array([[0.0, 1.0], [np.inf, 2.0], [1.0, 1.0]]), "contains NaN or infinity"),
        (np.arange(10.0), "must be a 2-D array"),
        (np.ones((1, 3)), "needs at least 2 samples in `X`, got n_samples=1"),
    ],
)
def test_bad_data_raises_worded_errors(X, message):
    with pytest.raises(InputError, match=message.replace("(", r"\(")):
        LaplacianEigenmaps().fit(X)


def test_transform_checks_features():
    model = LaplacianEigenmaps().fit(X_OK)
    with pytest.raises(ValueError, match="3 features"):
        model.transform(np.ones((2, 4)))


@pytest.mark.parametrize("normalization", ["random_walk", "symmetric", "unnormalized"])
def test_nystrom_reproduces_the_amg_embedding_to_one_in_a_million(normalization):
    # Issue 13: on a 700-point swiss roll (k = 12, above the dense limit, so AMG-LOBPCG) the
    # extension of the training points reproduced the embedding only to about 5e-5; the
    # eigenpairs are now solved to a residual of 1e-7. Exact fact: the Nyström extension of
    # an exact eigenvector is that eigenvector on the training points.
    X, _ = make_swiss_roll(700, noise=0.0, random_state=0)
    model = LaplacianEigenmaps(n_neighbors=12, normalization=normalization, random_state=0)
    model.fit(X)
    assert model.solver_ == "amg"
    gap = np.abs(model.transform(X) - model.embedding_).max()
    assert gap <= 1e-6 * np.abs(model.embedding_).max()
