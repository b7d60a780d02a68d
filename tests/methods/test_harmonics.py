"""Repeated eigendirections: the residuals of Dsilva et al. and the coordinates they choose.

Checks against exact facts: the Neumann eigenfunctions of a rectangle, cos(m pi x / L)
cos(n pi y / W) with eigenvalues pi^2 (m^2 / L^2 + n^2 / W^2) (REFERENCES.md, repeated
eigendirections), and the quick suite's swiss roll, whose second intrinsic direction lives in
the fourth Laplacian eigenvector (issue 13).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from lowdim import datasets
from lowdim.errors import InputError
from lowdim.methods import DiffusionMaps, KernelPCA, LaplacianEigenmaps
from lowdim.methods._harmonics import (
    choose_coordinates,
    examined_count,
    independent_columns,
    local_regression_residuals,
)

LENGTH, WIDTH = 2.5, 1.0


def canonical_correlations(A, B):
    """Cosines of the principal angles between the centred column spaces of A and B."""
    qa, _ = np.linalg.qr(A - A.mean(axis=0))
    qb, _ = np.linalg.qr(B - B.mean(axis=0))
    return np.linalg.svd(qa.T @ qb, compute_uv=False)


def strip(n, seed=0):
    rng = np.random.default_rng(seed)
    return np.c_[rng.uniform(0, LENGTH, n), rng.uniform(0, WIDTH, n)]


def neumann_modes(P, modes):
    """cos(m pi x / L) cos(k pi y / W) for each (m, k): the rectangle's Neumann eigenfunctions."""
    x, y = P[:, 0], P[:, 1]
    return np.column_stack(
        [np.cos(m * np.pi * x / LENGTH) * np.cos(k * np.pi * y / WIDTH) for m, k in modes]
    )


def test_exact_eigenfunctions_of_the_strip_score_harmonics_low_and_new_directions_high():
    # Exact fact (Neumann rectangle, L = 2.5, W = 1): the eigenvalue order is (1,0), (2,0),
    # (0,1), (1,1), (3,0); (2,0) is a function of (1,0), (1,1) the product of (1,0) and (0,1),
    # (3,0) a function of (1,0); only (0,1) is a new direction (Dsilva et al., ACHA 44, 2018).
    P = strip(2000)
    modes = [(1, 0), (2, 0), (0, 1), (1, 1), (3, 0)]
    eigenvalues = [np.pi**2 * (m**2 / LENGTH**2 + k**2 / WIDTH**2) for m, k in modes]
    assert eigenvalues == sorted(eigenvalues)
    r = local_regression_residuals(neumann_modes(P, modes), random_state=0)
    assert r[0] == 1.0
    assert r[2] > 0.9
    assert np.all(r[[1, 3, 4]] < 0.2)


def test_residuals_ignore_each_columns_scale_and_offset():
    P = strip(800)
    V = neumann_modes(P, [(1, 0), (2, 0), (0, 1)])
    r = local_regression_residuals(V, random_state=0)
    rescaled = local_regression_residuals(V * [3.0, -0.01, 7.0] + [1.0, 2.0, -5.0], random_state=0)
    assert_allclose(rescaled, r, rtol=1e-10)


def test_a_constant_column_adds_nothing():
    V = np.c_[neumann_modes(strip(300), [(1, 0)]), np.full(300, 0.5)]
    assert_allclose(local_regression_residuals(V), [1.0, 0.0])


def test_sampled_residuals_agree_with_the_exact_ones():
    # Above the threshold the residuals come from a random subset; on exact eigenfunctions
    # the harmonic stays low and the new direction high.
    V = neumann_modes(strip(8000), [(1, 0), (2, 0), (0, 1)])
    exact = local_regression_residuals(V, exact_threshold=10_000)
    sampled = local_regression_residuals(V, random_state=0)
    assert_allclose(sampled, exact, atol=0.05)
    assert sampled[1] < 0.1 and sampled[2] > 0.9


def test_the_unpenalised_fit_reads_the_solvers_noise_as_a_dependence():
    # Why the ridge is there: on the quick suite's swiss roll the fourth Laplacian eigenvector
    # is the roll's height (issue 13), yet without the penalty it looks like a function of the
    # first three, whose thin spread carries the sampling noise.
    roll = datasets.load({"name": "swiss_roll", "n": 800, "noise": 0.05, "seed": 0})
    model = LaplacianEigenmaps(n_components=4, n_neighbors=10, random_state=0).fit(roll.X)
    plain = local_regression_residuals(model.embedding_, ridge=0.0)
    penalised = local_regression_residuals(model.embedding_)
    assert plain[3] < 0.2
    assert penalised[3] > 0.8


def test_independent_columns_keep_the_first_and_break_ties_to_the_earlier():
    assert list(independent_columns(np.array([1.0, 0.1, 1.05, 0.9]), 2)) == [0, 2]
    assert list(independent_columns(np.array([1.0, 0.7, 0.7, 0.2]), 2)) == [0, 1]
    assert list(independent_columns(np.array([1.0, 0.2, 0.9, 0.95]), 3)) == [0, 2, 3]


def test_choose_coordinates_falls_back_to_the_leading_ones_when_too_few_are_usable():
    V = neumann_modes(strip(500), [(1, 0), (2, 0), (0, 1)])
    keep, _ = choose_coordinates(V, "independent", 2, usable=np.array([True, True, False]))
    assert list(keep) == [0, 1]
    keep, _ = choose_coordinates(V, "independent", 2)
    assert list(keep) == [0, 2]


def test_examined_count():
    assert examined_count("leading", 2, 100) == 2
    assert examined_count("independent", 2, 100) == 8
    assert examined_count("independent", 3, 5) == 5
    assert examined_count("independent", 3, 2) == 3


ESTIMATORS = [
    pytest.param(LaplacianEigenmaps, {"n_neighbors": 10}, id="laplacian_eigenmaps"),
    pytest.param(DiffusionMaps, {}, id="diffusion_maps_dense"),
    pytest.param(DiffusionMaps, {"n_neighbors": 15}, id="diffusion_maps_knn"),
    pytest.param(KernelPCA, {}, id="kernel_pca"),
]


@pytest.mark.parametrize(("cls", "params"), ESTIMATORS)
def test_on_a_strip_the_leading_pair_misses_the_short_side_and_the_independent_pair_finds_it(
    cls, params
):
    # Exact fact (REFERENCES.md): on the uniform 2.5 x 1 strip the leading two eigenvectors
    # are (1,0) and (2,0), both functions of x, so their smallest canonical correlation with
    # (x, y) is at the sampling-noise level (about 0.003 measured); eigenvectors 1 and 3
    # recover both sides (0.98 measured).
    P = strip(1500)
    leading = cls(random_state=0, **params).fit(P)
    independent = cls(coordinates="independent", random_state=0, **params).fit(P)
    assert canonical_correlations(leading.embedding_, P).min() < 0.2
    assert leading.eigen_residuals_.shape == (2,)
    assert leading.eigen_residuals_[1] < 0.4
    assert canonical_correlations(independent.embedding_, P).min() > 0.95
    assert list(independent.eigenvector_indices_) == [0, 2]
    assert independent.eigen_residuals_.shape == (8,)
    assert independent.eigenvalues_.shape == (2,)


def test_laplacian_strip_reproduces_the_published_near_zero_correlation():
    # REFERENCES.md: smallest canonical correlation of the leading pair with (x, y) about 0.003.
    model = LaplacianEigenmaps(random_state=0).fit(strip(1500))
    assert canonical_correlations(model.embedding_, strip(1500)).min() < 0.01


@pytest.mark.parametrize(("cls", "params"), ESTIMATORS)
def test_transform_uses_the_chosen_eigenvectors(cls, params):
    # The Nyström extension of the kept eigenvectors gives the training embedding back.
    P = strip(700, seed=3)
    model = cls(coordinates="independent", random_state=0, **params).fit(P)
    scale = np.abs(model.embedding_).max()
    assert_allclose(model.transform(P), model.embedding_, rtol=0, atol=1e-6 * scale)
    new = strip(20, seed=4)
    assert model.transform(new).shape == (20, 2)


def test_swiss_roll_of_the_quick_suite_gains_its_height_with_independent_coordinates():
    # Issue 13 (measured on the quick suite's 800-point swiss roll, noise 0.05, k = 10): the
    # leading pair is a U-shaped curve (smallest canonical correlation with the truth 0.002);
    # the height lives in the fourth eigenvector, and keeping it raises that to above 0.6.
    roll = datasets.load({"name": "swiss_roll", "n": 800, "noise": 0.05, "seed": 0})
    leading = LaplacianEigenmaps(n_neighbors=10, random_state=0).fit(roll.X)
    independent = LaplacianEigenmaps(
        n_neighbors=10, coordinates="independent", random_state=0
    ).fit(roll.X)
    assert canonical_correlations(leading.embedding_, roll.truth).min() < 0.01
    assert list(independent.eigenvector_indices_) == [0, 3]
    assert canonical_correlations(independent.embedding_, roll.truth).min() > 0.6


def test_kernel_pca_never_chooses_a_null_eigenvector():
    # A linear kernel on 2-D data has two positive eigenvalues; the others are rounding, and
    # their eigenvectors arbitrary, so they are not candidates.
    X = strip(200)
    model = KernelPCA(kernel="linear", coordinates="independent").fit(X)
    assert list(model.eigenvector_indices_) == [0, 1]
    assert np.all(model.eigenvalues_ > 1.0)


def test_kernel_pca_landmarks_keep_chosen_axes_for_new_points():
    P = strip(1200)
    model = KernelPCA(n_landmarks=300, coordinates="independent", random_state=0).fit(P)
    assert list(model.eigenvector_indices_) == [0, 2]
    assert_allclose(model.transform(P), model.embedding_, atol=1e-10)


@pytest.mark.parametrize("cls", [LaplacianEigenmaps, DiffusionMaps, KernelPCA])
def test_a_bad_coordinates_value_is_worded(cls):
    with pytest.raises(InputError, match="`coordinates` of `.*` must be one of 'leading'"):
        cls(coordinates="independant").fit(strip(50))
