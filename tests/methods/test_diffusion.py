"""Tests for DiffusionMaps against exact facts of the diffusion operator."""

import numpy as np
import pytest
from _helpers import assert_allclose_up_to_sign
from numpy.testing import assert_allclose

from lowdim.errors import InputError
from lowdim.methods._graphs import DisconnectedGraphWarning
from lowdim.methods.diffusion import DENSE_KERNEL_LIMIT, DiffusionMaps


def canonical_correlations(A, B):
    """Cosines of the principal angles between the centred column spaces of A and B."""
    qa, _ = np.linalg.qr(A - A.mean(axis=0))
    qb, _ = np.linalg.qr(B - B.mean(axis=0))
    return np.linalg.svd(qa.T @ qb, compute_uv=False)


def on_circle(theta):
    return np.c_[np.cos(theta), np.sin(theta)]


EVEN = on_circle(2 * np.pi * np.arange(100) / 100)


@pytest.mark.parametrize("alpha", [0.0, 0.5, 1.0])
@pytest.mark.parametrize("n_neighbors", [None, 12])
def test_circle_gives_the_first_fourier_pair_for_any_alpha(alpha, n_neighbors):
    # Exact fact (REFERENCES.md, diffusion maps): n equally spaced points on the unit circle
    # have eigenvectors cos(theta), sin(theta) for any alpha (the kernel is circulant).
    model = DiffusionMaps(bandwidth=0.2, alpha=alpha, n_neighbors=n_neighbors)
    Y = model.fit_transform(EVEN)
    assert_allclose(canonical_correlations(Y, EVEN), 1.0, atol=1e-9)
    assert_allclose(model.eigenvalues_[0], model.eigenvalues_[1], rtol=1e-9)


def test_interval_first_coordinate_follows_cos_pi_x():
    # REFERENCES.md (Coifman & Lafon 2006): on [0, 1] the first non-trivial eigenfunction of
    # the Neumann Laplacian is cos(pi x); alpha = 1 removes the boundary's density effect.
    x = np.linspace(0.0, 1.0, 300)
    model = DiffusionMaps(n_components=1, bandwidth=0.03, alpha=1.0, diffusion_time=0)
    psi = model.fit_transform(x[:, None])[:, 0]
    assert abs(np.corrcoef(psi, np.cos(np.pi * x))[0, 1]) > 0.999


def test_alpha_one_removes_the_sampling_density():
    # Coifman & Lafon (2006), section 2.5 / Nadler et al. (2006): with alpha = 1 the limit is
    # the Laplace-Beltrami operator whatever the density, so non-uniform points on a circle
    # still give cos and sin of the angle; with alpha = 0 the density bends them.
    phi = 2 * np.pi * np.arange(400) / 400
    theta = phi + 0.7 * np.sin(phi)  # dense near theta = pi, sparse near 0
    X = on_circle(theta)
    geometric = DiffusionMaps(bandwidth=0.1, alpha=1.0).fit(X)
    graph = DiffusionMaps(bandwidth=0.1, alpha=0.0).fit(X)
    assert np.all(canonical_correlations(geometric.embedding_, X) > 0.9999)
    assert canonical_correlations(graph.embedding_, X)[-1] < 0.95
    assert_allclose(geometric.eigenvalues_[0], geometric.eigenvalues_[1], rtol=1e-4)


@pytest.mark.parametrize("n_neighbors", [None, 10])
@pytest.mark.parametrize("bandwidth", ["median", "local", 0.5])
def test_nystrom_is_exact_on_training_points(n_neighbors, bandwidth):
    # Exact fact (REFERENCES.md): psi_l(x) = (1/lambda_l) sum_j P(x, x_j) psi_l(x_j) holds on
    # the training points, since P psi_l = lambda_l psi_l.
    X = np.random.default_rng(0).normal(size=(150, 3))
    model = DiffusionMaps(
        n_neighbors=n_neighbors,
        bandwidth=bandwidth,
        alpha=0.5,
        diffusion_time=2,
        eigen_solver="dense",
    ).fit(X)
    assert_allclose(model.transform(X), model.embedding_, atol=1e-9)


def test_matches_a_naive_oracle_of_the_published_formulas():
    # Coifman & Lafon (2006), as in REFERENCES.md: K, q = K 1, K_alpha = Q^-a K Q^-a,
    # P = D^-1 K_alpha; right eigenvectors of P (numpy.linalg.eig), psi_0 = 1, scaled so that
    # sum_i pi_i psi_l(x_i)^2 = 1 with pi = d / sum(d); coordinates lambda^t psi.
    X = np.random.default_rng(1).normal(size=(80, 2))
    alpha, t, sigma = 0.5, 3, 1.0
    sq = ((X[:, None, :] - X[None, :, :]) ** 2).sum(axis=2)
    K = np.exp(-sq / (2 * sigma**2))
    q = K.sum(axis=1)
    K_alpha = K / np.outer(q**alpha, q**alpha)
    d = K_alpha.sum(axis=1)
    values, vectors = np.linalg.eig(K_alpha / d[:, None])
    order = np.argsort(-values.real)[:4]
    values, psi = values.real[order], vectors.real[:, order]
    pi = d / d.sum()
    psi /= np.sqrt((pi[:, None] * psi**2).sum(axis=0))
    assert_allclose(np.abs(psi[:, 0]), 1.0, atol=1e-10)
    model = DiffusionMaps(n_components=3, bandwidth=sigma, alpha=alpha, diffusion_time=t).fit(X)
    assert_allclose(model.eigenvalues_, values[1:], rtol=1e-10)
    assert_allclose_up_to_sign(model.embedding_, psi[:, 1:] * values[1:] ** t, atol=1e-10)
    base = DiffusionMaps(n_components=3, bandwidth=sigma, alpha=alpha, diffusion_time=0).fit(X)
    assert_allclose(model.embedding_, base.embedding_ * base.eigenvalues_**t, atol=1e-12)


def test_sparse_solver_chain_agrees_with_dense():
    # Outside reference: LAPACK's dense eigh on the same sparse kernel.
    from sklearn.datasets import make_swiss_roll

    X, _ = make_swiss_roll(1000, random_state=0)
    dense = DiffusionMaps(n_neighbors=10, bandwidth="local", eigen_solver="dense").fit(X)
    amg = DiffusionMaps(n_neighbors=10, bandwidth="local", random_state=0).fit(X)
    assert (dense.solver_, amg.solver_) == ("dense", "amg")
    assert_allclose(amg.eigenvalues_, dense.eigenvalues_, rtol=1e-6)
    assert_allclose_up_to_sign(amg.embedding_, dense.embedding_, atol=1e-3)


def test_disconnected_kernel_policies():
    rng = np.random.default_rng(2)
    X = np.vstack([rng.normal(size=(30, 2)), rng.normal(size=(6, 2)) + 40.0])
    with pytest.warns(DisconnectedGraphWarning, match=r"2 connected components \(sizes 30, 6\)"):
        DiffusionMaps(n_neighbors=5, bandwidth=1.0).fit(X)
    with pytest.raises(InputError, match="raise `bandwidth` or `n_neighbors`"):
        DiffusionMaps(n_neighbors=5, bandwidth=1.0, on_disconnected="raise").fit(X)
    with pytest.warns(DisconnectedGraphWarning, match="largest component"):
        model = DiffusionMaps(n_neighbors=5, bandwidth=1.0, on_disconnected="largest").fit(X)
    assert np.array_equal(model.excluded_, np.arange(30, 36))
    assert model.embedding_.shape == (36, 2) and np.all(np.isfinite(model.embedding_))


X_OK = np.random.default_rng(0).normal(size=(20, 3))


@pytest.mark.parametrize(
    "params, message",
    [
        (
            {"alpha": 1.5},
            "the parameter `alpha` of `DiffusionMaps` must be a number in [0, 1], got 1.5",
        ),
        ({"alpha": -0.1}, "`alpha` of `DiffusionMaps` must be a number in [0, 1], got -0.1"),
        (
            {"n_neighbors": 0},
            "`n_neighbors` of `DiffusionMaps` must be None or an int in [1, n_samples - 1], got 0",
        ),
        ({"n_neighbors": 25}, "[1, n_samples - 1], got 25"),
        (
            {"n_components": 20},
            "`n_components` of `DiffusionMaps` must be an int in [1, n_samples - 1], got 20",
        ),
        (
            {"diffusion_time": -1},
            "`diffusion_time` of `DiffusionMaps` must be an int in [0, inf), got -1",
        ),
        ({"bandwidth": "silverman"}, "`bandwidth` of `DiffusionMaps` must be"),
        ({"bandwidth": 1e-10}, "`bandwidth` of `DiffusionMaps` is too small for this data"),
        ({"bandwidth": 1e-10, "n_neighbors": 5}, "is too small for this data"),
    ],
)
def test_bad_parameters_raise_worded_errors(params, message):
    with pytest.raises(InputError) as info:
        DiffusionMaps(**params).fit(X_OK)
    assert message in str(info.value)


def test_dense_kernel_is_refused_for_large_n():
    X = np.zeros((DENSE_KERNEL_LIMIT + 1, 1))
    with pytest.raises(InputError, match="set n_neighbors \\(for example 15\\)"):
        DiffusionMaps().fit(X)


@pytest.mark.parametrize(
    "X, message",
    [
        (np.array([[0.0, 1.0], [np.nan, 2.0], [1.0, 1.0]]), "contains NaN or infinity"),
        (np.arange(10.0), "must be a 2-D array"),
        (np.ones((1, 3)), "got n_samples=1"),
    ],
)
def test_bad_data_raises_worded_errors(X, message):
    with pytest.raises(InputError, match=message):
        DiffusionMaps().fit(X)


@pytest.mark.parametrize("alpha", [0.0, 0.5, 1.0])
def test_nystrom_reproduces_the_amg_embedding_to_one_in_a_million(alpha):
    # Issue 13: on a 700-point swiss roll (k = 12, the sparse kernel solved by AMG-LOBPCG) the
    # extension reproduced the training embedding only to about 5e-5; the eigenpairs are now
    # solved to a residual of 1e-7 (exact fact: P psi = lambda psi on the training points).
    from sklearn.datasets import make_swiss_roll

    X, _ = make_swiss_roll(700, noise=0.0, random_state=0)
    model = DiffusionMaps(n_neighbors=12, alpha=alpha, random_state=0).fit(X)
    assert model.solver_ == "amg"
    gap = np.abs(model.transform(X) - model.embedding_).max()
    assert gap <= 1e-6 * np.abs(model.embedding_).max()
