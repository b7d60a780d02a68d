"""KernelPCA against scikit-learn, exact facts and the half-moons fact of the trade."""

import numpy as np
import pytest
from _helpers import assert_allclose_up_to_sign
from numpy.testing import assert_allclose
from scipy.spatial.distance import pdist
from sklearn.datasets import make_moons
from sklearn.decomposition import KernelPCA as SklearnKernelPCA
from sklearn.metrics.pairwise import laplacian_kernel

from lowdim.errors import InputError
from lowdim.methods.kernel_pca import KernelPCA
from lowdim.methods.linear import PCAEmbedding


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(0)
    return rng.normal(size=(150, 4)), rng.normal(size=(12, 4))


@pytest.mark.parametrize(
    "ours, theirs",
    [
        (dict(kernel="rbf", bandwidth=1.5), dict(kernel="rbf", gamma=1 / (2 * 1.5**2))),
        (dict(kernel="rbf", gamma=0.2), dict(kernel="rbf", gamma=0.2)),
        (dict(kernel="linear"), dict(kernel="linear")),
        (
            dict(kernel="polynomial", gamma=0.4, degree=3, coef0=1.5),
            dict(kernel="poly", gamma=0.4, degree=3, coef0=1.5),
        ),
        (dict(kernel="cosine"), dict(kernel="cosine")),
    ],
)
def test_matches_scikit_learn_including_out_of_sample(data, ours, theirs):
    X, new = data
    model = KernelPCA(n_components=3, **ours).fit(X)
    ref = SklearnKernelPCA(n_components=3, eigen_solver="dense", **theirs).fit(X)
    # sklearn.decomposition.KernelPCA is the reference; bandwidth sigma is gamma = 1/(2 sigma^2)
    # (REFERENCES.md conventions)
    assert_allclose(model.eigenvalues_, ref.eigenvalues_, rtol=1e-9)
    assert_allclose_up_to_sign(model.embedding_, ref.transform(X), atol=1e-9)
    assert_allclose_up_to_sign(model.transform(new), ref.transform(new), atol=1e-9)
    assert_allclose(model.transform(X), model.embedding_, atol=1e-9)


def test_laplacian_kernel_matches_scikit_learn_precomputed(data):
    X, new = data
    model = KernelPCA(n_components=2, kernel="laplacian", bandwidth=4.0).fit(X)
    ref = SklearnKernelPCA(n_components=2, kernel="precomputed", eigen_solver="dense")
    # sklearn.metrics.pairwise.laplacian_kernel with gamma = 1 / sigma is the reference
    ref.fit(laplacian_kernel(X, gamma=0.25))
    assert_allclose_up_to_sign(model.embedding_, ref.transform(laplacian_kernel(X, gamma=0.25)))
    assert_allclose_up_to_sign(
        model.transform(new), ref.transform(laplacian_kernel(new, X, gamma=0.25)), atol=1e-10
    )


def test_precomputed_equals_linear_and_gamma_wins(data):
    X, new = data
    linear = KernelPCA(kernel="linear").fit(X)
    pre = KernelPCA(kernel="precomputed").fit(X @ X.T)
    assert_allclose(pre.embedding_, linear.embedding_, atol=1e-10)
    assert_allclose(pre.transform(new @ X.T), linear.transform(new), atol=1e-10)
    both = KernelPCA(gamma=0.125, bandwidth="median").fit(X)
    sigma = KernelPCA(bandwidth=2.0).fit(X)  # gamma = 1/(2 * 2^2)
    assert both.bandwidth_rule_ == "gamma" and both.bandwidth_ == pytest.approx(2.0)
    assert_allclose(both.embedding_, sigma.embedding_, atol=1e-12)


def test_large_bandwidth_approaches_scaled_linear_pca(data):
    X, _ = data
    pca = PCAEmbedding(n_components=2).fit_transform(X)
    errors = []
    for sigma in (30.0, 300.0):
        gamma = 1 / (2 * sigma**2)
        scores = KernelPCA(n_components=2, bandwidth=sigma).fit_transform(X)
        # REFERENCES.md [computed; derived]: K~ -> 2 gamma Xc Xc^T, so the scores tend to
        # sqrt(2 gamma) times the PCA scores
        scaled = scores / np.sqrt(2 * gamma)
        signs = np.sign(np.sum(scaled * pca, axis=0))
        errors.append(np.max(np.abs(scaled * signs - pca)) / np.max(np.abs(pca)))
    assert errors[1] < 1e-3
    assert errors[1] < errors[0] / 30  # the gap shrinks like gamma = 1/(2 sigma^2)


def test_bandwidth_rules_are_recorded(data):
    X, new = data
    median = KernelPCA(bandwidth="median").fit(X)
    # common practice: median pairwise distance (REFERENCES.md, bandwidth rules)
    assert median.bandwidth_ == pytest.approx(np.median(pdist(X)))
    assert median.bandwidth_rule_ == "median" and median.local_bandwidths_ is None
    local = KernelPCA(bandwidth="local:5").fit(X)
    assert local.bandwidth_rule_ == "local:5" and local.local_bandwidths_.shape == (150,)
    assert_allclose(local.transform(X), local.embedding_, atol=1e-9)
    assert local.transform(new).shape == (12, 2)
    kernel_sum = KernelPCA(bandwidth="kernel_sum", random_state=0).fit(X)
    assert kernel_sum.bandwidth_rule_ == "kernel_sum" and kernel_sum.bandwidth_ > 0
    assert KernelPCA(kernel="linear").fit(X).bandwidth_ is None


def test_nystrom_exact_with_all_landmarks_and_close_with_few(data):
    X, new = data
    exact = KernelPCA(n_components=2, bandwidth=2.0).fit(X)
    full = KernelPCA(n_components=2, bandwidth=2.0, n_landmarks=150, random_state=0).fit(X)
    # Williams & Seeger (2001): with every point a landmark the Nystrom kernel is exact
    assert_allclose_up_to_sign(full.embedding_, exact.embedding_, atol=1e-8)
    assert_allclose_up_to_sign(full.transform(new), exact.transform(new), atol=1e-8)
    few = KernelPCA(n_components=2, bandwidth=2.0, n_landmarks=60, random_state=0).fit(X)
    assert few.solver_ == "nystrom" and few.landmarks_.size == 60
    assert_allclose(few.transform(X), few.embedding_, atol=1e-10)
    for j in range(2):
        assert abs(np.corrcoef(few.embedding_[:, j], exact.embedding_[:, j])[0, 1]) > 0.97


def test_random_state_and_iterative_solver_repeatable():
    X = np.random.default_rng(1).normal(size=(650, 3)) * [2.0, 1.0, 0.5]
    a = KernelPCA(bandwidth=1.0, random_state=4).fit(X)
    b = KernelPCA(bandwidth=1.0, random_state=4).fit(X)
    ref = SklearnKernelPCA(
        n_components=2, kernel="rbf", gamma=0.5, eigen_solver="arpack", random_state=0
    )
    assert a.solver_ == "arpack"
    assert_allclose(a.embedding_, b.embedding_)
    assert_allclose_up_to_sign(a.embedding_, ref.fit_transform(X), atol=1e-7)
    rows = np.argmax(np.abs(a.embedding_), axis=0)
    assert np.all(a.embedding_[rows, [0, 1]] > 0)  # DEVELOPERS.md sign rule


@pytest.mark.parametrize(
    "ours, theirs",
    [
        (dict(kernel="rbf", gamma=0.3), dict(kernel="rbf", gamma=0.3)),
        (dict(kernel="cosine"), dict(kernel="cosine")),
        (
            dict(kernel="polynomial", gamma=0.4, degree=2, coef0=1.0),
            dict(kernel="poly", gamma=0.4, degree=2, coef0=1.0),
        ),
    ],
)
def test_lanczos_on_products_matches_a_dense_solve(ours, theirs):
    # Above the dense limit the centred kernel is never formed: Lanczos works on J K J v
    # products reading one triangle of K. sklearn.decomposition.KernelPCA with a dense
    # eigensolver is the reference, embedding and out-of-sample transform alike.
    rng = np.random.default_rng(2)
    X, new = rng.normal(size=(700, 3)), rng.normal(size=(20, 3))
    model = KernelPCA(n_components=3, random_state=0, **ours).fit(X)
    ref = SklearnKernelPCA(n_components=3, eigen_solver="dense", **theirs).fit(X)
    assert model.solver_ == "arpack"
    assert_allclose(model.eigenvalues_, ref.eigenvalues_, rtol=1e-8)
    assert_allclose_up_to_sign(model.embedding_, ref.transform(X), atol=1e-7)
    assert_allclose_up_to_sign(model.transform(new), ref.transform(new), atol=1e-7)


def test_lanczos_with_local_scales_matches_our_dense_solve():
    # The same eigenproblem solved two ways (exact fact): per-point scales make the kernel
    # matrix full, and the product path must agree with the dense eigendecomposition.
    X = np.random.default_rng(5).normal(size=(700, 3))
    fast = KernelPCA(bandwidth="local", solver="arpack", random_state=0).fit(X)
    dense = KernelPCA(bandwidth="local", solver="dense", random_state=0).fit(X)
    assert_allclose(fast.eigenvalues_, dense.eigenvalues_, rtol=1e-8)
    assert_allclose(fast.embedding_, dense.embedding_, atol=1e-7)


def _linear_accuracy(score, labels):
    """Best accuracy of a threshold on a 1-D score: a linear classifier in one dimension."""
    order = np.argsort(score)
    ones = np.cumsum(labels[order] == 1)
    zeros = np.cumsum(labels[order] == 0)
    left_zero = zeros + (ones[-1] - ones)
    left_one = ones + (zeros[-1] - zeros)
    return max(left_zero.max(), left_one.max()) / labels.size


def test_half_moons_need_a_well_chosen_bandwidth():
    X, y = make_moons(400, noise=0.05, random_state=0)
    # common practice; REFERENCES.md [computed]: on 400 half-moon points with noise 0.05 a
    # 1-D RBF kernel PCA separates the moons for gamma in about [10, 32]; the median rule
    # (gamma ~ 0.4, 77 %) and a global scale at the 7th-neighbour distance (gamma ~ 70, 74 %)
    # do not, and neither does 1-D PCA
    for gamma in (10.0, 20.0, 32.0):
        score = KernelPCA(n_components=1, gamma=gamma).fit_transform(X)[:, 0]
        assert _linear_accuracy(score, y) >= 0.98
    median = KernelPCA(n_components=1, bandwidth="median").fit(X)
    assert 1 / (2 * median.bandwidth_**2) == pytest.approx(0.4, abs=0.05)
    assert _linear_accuracy(median.embedding_[:, 0], y) < 0.8
    seventh = KernelPCA(n_components=1, bandwidth="local").fit(X).bandwidth_
    assert 1 / (2 * seventh**2) == pytest.approx(70, rel=0.1)
    score = KernelPCA(n_components=1, bandwidth=seventh).fit_transform(X)[:, 0]
    assert _linear_accuracy(score, y) < 0.8
    pca = PCAEmbedding(n_components=1).fit_transform(X)[:, 0]
    assert _linear_accuracy(pca, y) < 0.8


@pytest.mark.parametrize(
    "params, data, pattern",
    [
        (
            dict(n_components=50),
            np.random.default_rng(0).normal(size=(50, 3)),
            r"^the parameter `n_components` of `KernelPCA` must be an int in "
            r"\[1, n_samples - 1\], got 50$",
        ),
        (
            dict(gamma=0.0),
            None,
            r"`gamma` of `KernelPCA` must be None or a number in \(0, inf\), got 0.0",
        ),
        (dict(gamma=-1), None, r"`gamma` of `KernelPCA` .*got -1"),
        (
            dict(kernel="gaussian"),
            None,
            r"`kernel` of `KernelPCA` must be one of .*got 'gaussian'",
        ),
        (dict(bandwidth="medain"), None, r"got 'medain' \(did you mean 'median'\?\)"),
        (
            dict(bandwidth="local:x"),
            None,
            r"`bandwidth` of `KernelPCA` .*'local:K'.*got 'local:x'",
        ),
        (
            dict(bandwidth=1e-4),
            None,
            r"`bandwidth` of `KernelPCA` is too small .*0.0001.*'median'",
        ),
        (dict(gamma=1e6), None, r"`gamma` of `KernelPCA` is too large .*1000000.0"),
        (dict(kernel="laplacian", bandwidth="kernel_sum"), None, r"Euclidean distances only"),
        (dict(n_landmarks=2), None, r"`n_landmarks` of `KernelPCA` must be greater than"),
        (dict(kernel="precomputed"), np.ones((6, 4)), r"must be a square kernel matrix.*\(6, 4\)"),
        (
            dict(kernel="precomputed"),
            np.triu(np.ones((6, 6))),
            r"`kernel` of `KernelPCA` is 'precomputed', so `X` must be symmetric",
        ),
        (
            dict(kernel="precomputed"),
            -np.eye(6) + 0.1,
            r"kernel of `KernelPCA` \(kernel='precomputed'\) is not positive semi-definite",
        ),
        (dict(), np.array([[0.0, 1.0], [np.inf, 2.0], [1, 1]]), r"NaN or infinity"),
        (dict(), np.arange(4.0), r"must be a 2-D array .*got 1-D"),
        (dict(), np.ones((1, 3)), r"at least 2 samples .*n_samples=1"),
    ],
)
def test_bad_input_is_worded(params, data, pattern):
    if data is None:
        data = np.random.default_rng(0).normal(size=(30, 3))
    with pytest.raises(InputError, match=pattern):
        KernelPCA(**params).fit(data)


def test_indefinite_polynomial_kernel_is_refused():
    X = np.random.default_rng(2).normal(size=(60, 3))
    with pytest.raises(InputError, match="coef0 >= 0"):
        # (gamma x.y - 5)^2 has the negative-definite part -10 gamma x.y: an exact fact
        KernelPCA(kernel="polynomial", degree=2, coef0=-5.0, gamma=0.1).fit(X)
