"""PCAEmbedding and ClassicalMDS against scikit-learn and exact facts."""

import numpy as np
import pytest
import scipy.linalg
from _helpers import assert_allclose_up_to_sign
from numpy.testing import assert_allclose
from scipy.spatial.distance import cdist
from sklearn.decomposition import PCA
from sklearn.manifold import ClassicalMDS as SklearnClassicalMDS

from lowdim.errors import InputError
from lowdim.methods.linear import ClassicalMDS, PCAEmbedding


def _data(n=200, d=6, seed=0):
    rng = np.random.default_rng(seed)
    return rng.normal(size=(n, d)) * np.arange(1, d + 1) + 3.0


def _rigid_residual(A, B):
    """Residual of the best rotation/reflection + translation taking A onto B."""
    A, B = A - A.mean(0), B - B.mean(0)
    R, _ = scipy.linalg.orthogonal_procrustes(A, B)
    return float(np.max(np.abs(A @ R - B)))


@pytest.mark.parametrize(
    "shape, solver, expected",
    [
        ((300, 6), "auto", "scatter_eigh"),
        ((300, 6), "randomized", "randomized"),
        ((40, 60), "full", "svd"),
        ((600, 520), "auto", "randomized"),
    ],
)
def test_pca_matches_scikit_learn_per_component(shape, solver, expected):
    rng = np.random.default_rng(1)
    # five strong directions over weak noise: a spectral gap the randomized solver resolves
    X = rng.normal(size=(shape[0], 5)) @ rng.normal(size=(5, shape[1])) * 5.0
    X = X @ np.diag(np.linspace(1.0, 2.0, shape[1])) + 0.01 * rng.normal(size=shape) + 1.0
    ours = PCAEmbedding(n_components=3, solver=solver, random_state=0).fit(X)
    ref = PCA(n_components=3, svd_solver="full").fit(X)
    # sklearn.decomposition.PCA is the reference, per component up to sign
    assert ours.solver_ == expected
    assert_allclose_up_to_sign(ours.embedding_, ref.transform(X), rtol=1e-6, atol=1e-8)
    assert_allclose_up_to_sign(ours.components_.T, ref.components_.T, rtol=1e-6, atol=1e-8)
    assert_allclose(ours.explained_variance_, ref.explained_variance_, rtol=1e-8)
    assert_allclose(ours.explained_variance_ratio_, ref.explained_variance_ratio_, rtol=1e-8)
    assert_allclose(ours.singular_values_, ref.singular_values_, rtol=1e-8)
    assert_allclose(ours.eigenvalues_, ours.explained_variance_)
    new = rng.normal(size=(7, shape[1]))
    assert_allclose_up_to_sign(ours.transform(new), ref.transform(new), rtol=1e-6, atol=1e-8)


def test_pca_signs_are_deterministic():
    X = _data()
    a = PCAEmbedding(n_components=3).fit(X)
    b = PCAEmbedding(n_components=3).fit(X[::-1])
    # DEVELOPERS.md: the largest-magnitude entry of each axis is positive
    rows = np.argmax(np.abs(a.components_), axis=1)
    assert np.all(a.components_[np.arange(3), rows] > 0)
    assert_allclose(a.components_, b.components_, atol=1e-10)
    assert np.all(np.diff(a.explained_variance_) <= 0)


def test_classical_mds_matches_scikit_learn_and_precomputed():
    X = _data(n=150, d=5)
    ours = ClassicalMDS(n_components=3).fit(X)
    ref = SklearnClassicalMDS(n_components=3).fit(X)
    # sklearn.manifold.ClassicalMDS is the reference (full eigendecomposition of B)
    assert_allclose_up_to_sign(ours.embedding_, ref.embedding_, rtol=1e-8, atol=1e-8)
    assert_allclose(ours.eigenvalues_, ref.eigenvalues_, rtol=1e-8)
    # REFERENCES.md [computed]: for Euclidean input the eigenvalues are the squared singular
    # values of the centred data
    S = np.linalg.svd(X - X.mean(0), compute_uv=False)[:3]
    assert_allclose(ours.eigenvalues_, S**2, rtol=1e-10)
    D = cdist(X, X)
    pre = ClassicalMDS(n_components=3, metric="precomputed").fit(D)
    ref_pre = SklearnClassicalMDS(n_components=3, metric="precomputed").fit(D)
    # feature input and precomputed distances give the same embedding, signs included
    assert_allclose(pre.embedding_, ours.embedding_, atol=1e-8)
    assert_allclose_up_to_sign(pre.embedding_, ref_pre.embedding_, atol=1e-8)
    assert pre.negative_eigenvalue_share_ == 0.0 and ours.negative_eigenvalue_share_ == 0.0


@pytest.mark.filterwarnings("error")
def test_classical_mds_recovers_configuration_up_to_rigid_motion():
    rng = np.random.default_rng(2)
    config = rng.normal(size=(700, 2)) * [3.0, 1.0]
    rotation = np.linalg.qr(rng.normal(size=(5, 5)))[0][:2]
    X = config @ rotation + rng.normal(size=5)
    D = cdist(X, X)
    Y = ClassicalMDS(n_components=2, metric="precomputed", random_state=0).fit_transform(D)
    # Torgerson (1952) / Gower (1966): Euclidean distances determine the configuration up to
    # a rigid motion (exact fact); 700 points use the iterative top-k solver
    assert _rigid_residual(Y, config) < 1e-8


def test_precomputed_transform_is_the_projection_for_euclidean_data():
    X = _data(n=120, d=4)
    new = _data(n=9, d=4, seed=7)
    features = ClassicalMDS(n_components=2).fit(X)
    pre = ClassicalMDS(n_components=2, metric="precomputed").fit(cdist(X, X))
    # de Silva & Tenenbaum (2004) triangulation with every point a landmark reproduces the
    # training coordinates, and for Euclidean data equals the PCA projection (derived)
    assert_allclose(pre.transform(cdist(X[:10], X)), pre.embedding_[:10], atol=1e-8)
    assert_allclose(pre.transform(cdist(new, X)), features.transform(new), atol=1e-8)
    assert_allclose(features.transform(X), features.embedding_, atol=1e-8)


@pytest.mark.parametrize("metric", ["euclidean", "precomputed"])
def test_landmark_mds_reproduces_landmarks_and_rigid_configuration(metric):
    rng = np.random.default_rng(3)
    config = rng.normal(size=(400, 3))
    X = config @ np.linalg.qr(rng.normal(size=(6, 6)))[0][:3]
    D = cdist(X, X)
    data = D if metric == "precomputed" else X
    lm = ClassicalMDS(n_components=3, metric=metric, n_landmarks=30, random_state=0).fit(data)
    idx = lm.landmarks_
    assert idx.size == 30 and np.all(np.diff(idx) > 0)
    # REFERENCES.md (de Silva & Tenenbaum 2004): landmarks reproduce their own coordinates,
    # which are classical MDS of the landmarks alone
    own = ClassicalMDS(n_components=3, metric="precomputed").fit(D[np.ix_(idx, idx)])
    assert_allclose(lm.embedding_[idx], own.embedding_, atol=1e-10)
    rows = D[idx] if metric == "precomputed" else X[idx]
    assert_allclose(lm.transform(rows), own.embedding_, atol=1e-8)
    # for a Euclidean configuration of rank <= n_components every point is placed exactly
    assert _rigid_residual(lm.embedding_, config) < 1e-8


def test_negative_eigenvalue_share_for_non_euclidean_input():
    rng = np.random.default_rng(4)
    for n in (200, 650):
        Y = rng.normal(size=(n, 5))
        D = cdist(Y, Y, "cityblock")
        with pytest.warns(UserWarning, match="not Euclidean"):
            mds = ClassicalMDS(n_components=2, metric="precomputed", random_state=0).fit(D)
        D2 = D**2
        means = D2.mean(0)
        eig = np.linalg.eigvalsh(-0.5 * (D2 - means - means[:, None] + means.mean()))
        # naive oracle: the full spectrum of B = -1/2 J D^2 J (Gower 1966)
        exact = -eig[eig < 0].sum() / np.abs(eig).sum()
        assert mds.negative_eigenvalue_share_ == pytest.approx(
            exact, abs=0.04 if n > 600 else 1e-8
        )
        assert np.all(mds.eigenvalues_ > 0)


def test_more_components_than_features_gives_zero_coordinates():
    X = _data(n=50, d=2)
    ours = ClassicalMDS(n_components=3).fit(X)
    pre = ClassicalMDS(n_components=3, metric="precomputed").fit(cdist(X, X))
    assert_allclose(ours.embedding_[:, 2], 0.0)
    assert_allclose(pre.embedding_[:, 2], 0.0, atol=1e-6)
    assert_allclose(pre.embedding_[:, :2], ours.embedding_[:, :2], atol=1e-8)
    assert ours.transform(X[:4]).shape == (4, 3)


def test_random_state_and_solver_repeatable():
    X = _data(n=620, d=510, seed=5)
    a = PCAEmbedding(solver="randomized", random_state=3).fit_transform(X)
    b = PCAEmbedding(solver="randomized", random_state=3).fit_transform(X)
    assert_allclose(a, b)
    D = cdist(X, X)
    c = ClassicalMDS(metric="precomputed", random_state=1).fit(D)
    d = ClassicalMDS(metric="precomputed", random_state=1).fit(D)
    assert c.solver_ == "arpack"
    assert_allclose(c.embedding_, d.embedding_)


@pytest.mark.parametrize(
    "make, data, pattern",
    [
        (
            lambda: ClassicalMDS(n_components=50),
            np.ones((50, 3)),
            r"the parameter `n_components` of `ClassicalMDS` must be an int in "
            r"\[1, n_samples - 1\], got 50",
        ),
        (
            lambda: PCAEmbedding(n_components=4),
            _data(n=30, d=3),
            r"the parameter `n_components` of `PCAEmbedding` must be an int in "
            r"\[1, min\(n_samples - 1, n_features\)\] = \[1, 3\] .*got 4",
        ),
        (lambda: PCAEmbedding(solver="exact"), _data(), r"`solver` of `PCAEmbedding`.*'exact'"),
        (
            lambda: ClassicalMDS(metric="cosine"),
            _data(),
            r"`metric` of `ClassicalMDS` must be one of 'euclidean', 'precomputed', got 'cosine'",
        ),
        (
            lambda: ClassicalMDS(metric="precomputed"),
            np.ones((5, 3)),
            r"`metric` of `ClassicalMDS` is 'precomputed', so `X` must be a square .* \(5, 3\)",
        ),
        (
            lambda: ClassicalMDS(metric="precomputed"),
            np.triu(np.ones((5, 5)), 1),
            r"must be symmetric, but X\[0, 1\] = 1 and X\[1, 0\] = 0",
        ),
        (
            lambda: ClassicalMDS(n_components=3, n_landmarks=3),
            _data(),
            r"`n_landmarks` of `ClassicalMDS` must be greater than n_components = 3 .*, got 3",
        ),
        (lambda: PCAEmbedding(), np.arange(5.0), r"must be a 2-D array .* got 1-D"),
        (lambda: ClassicalMDS(), np.ones((1, 3)), r"at least 2 samples .* n_samples=1"),
        (lambda: PCAEmbedding(), np.array([[1.0, np.nan], [2, 3], [4, 5]]), r"NaN or infinity"),
    ],
)
def test_bad_input_is_worded(make, data, pattern):
    with pytest.raises(InputError, match=pattern):
        make().fit(data)


def test_transform_checks_its_input():
    pca = PCAEmbedding().fit(_data())
    with pytest.raises(ValueError, match="features"):
        pca.transform(np.ones((3, 2)))
    with pytest.raises(InputError, match="NaN or infinity"):
        pca.transform(np.full((2, 6), np.inf))


def test_pca_keeps_precision_for_far_off_means():
    rng = np.random.default_rng(6)
    X = rng.normal(size=(2000, 5)) * [5.0, 3.0, 2.0, 1.0, 0.5] + 1e5
    ours = PCAEmbedding(n_components=3).fit(X)
    ref = PCA(n_components=3, svd_solver="full").fit(X)
    # sklearn's exact SVD route is the reference; the scatter route must centre first here
    assert ours.solver_ == "scatter_eigh"
    assert_allclose(ours.explained_variance_, ref.explained_variance_, rtol=1e-9)
    assert_allclose_up_to_sign(ours.components_.T, ref.components_.T, atol=1e-9)
