"""Degenerate embeddings named: each check on cases that must trigger and on healthy ones."""

import tracemalloc
import warnings

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.stats import chi2

from lowdim import datasets
from lowdim.methods import KernelPCA, LaplacianEigenmaps, PCAEmbedding
from lowdim.methods._graphs import DisconnectedGraphWarning
from lowdim.metrics.degeneracy import (
    KINDS,
    collapsed_components,
    concentrated_variance,
    duplicate_clusters,
    find_degeneracies,
    flat_coordinates,
    graph_components,
    harmonic_coordinates,
    kernel_extremes,
)


def gaussian(n=1000, d=2, seed=0):
    return np.random.default_rng(seed).normal(size=(n, d))


@pytest.fixture(scope="module")
def blob_pca():
    X = gaussian(d=3) * [3.0, 2.0, 1.0]
    model = PCAEmbedding(n_components=2).fit(X)
    return X, model


def test_pca_of_a_gaussian_blob_is_healthy(blob_pca):
    X, model = blob_pca
    assert find_degeneracies(model.embedding_, X=X, fitted=model) == []


def test_quick_suite_swiss_roll_laplacian_is_a_harmonic():
    # Issue 13: on the quick suite's 800-point swiss roll, Laplacian eigenmaps with k = 10
    # draws a U: its second coordinate is a harmonic of the first (Dsilva et al., ACHA 44,
    # 2018).
    roll = datasets.load({"name": "swiss_roll", "n": 800, "noise": 0.05, "seed": 0})
    model = LaplacianEigenmaps(n_neighbors=10, random_state=0).fit(roll.X)
    found = find_degeneracies(model.embedding_, X=roll.X, fitted=model)
    assert [d.kind for d in found] == ["harmonic"]
    assert found[0].coordinate == 2 and found[0].value < 0.3
    assert "coordinate 2" in found[0].explanation
    # the independent coordinates are not harmonics
    better = LaplacianEigenmaps(n_neighbors=10, coordinates="independent", random_state=0)
    better.fit(roll.X)
    assert harmonic_coordinates(better.eigen_residuals_, better.eigenvector_indices_) == []


def test_a_square_has_no_harmonic():
    # Exact fact: on the unit square the first two Neumann eigenfunctions are cos(pi x) and
    # cos(pi y) (one eigenvalue, any rotation of the pair), two independent directions.
    X = np.random.default_rng(0).uniform(size=(1500, 2))
    model = LaplacianEigenmaps(n_neighbors=10, random_state=0).fit(X)
    assert model.eigen_residuals_[1] > 0.8
    assert find_degeneracies(model.embedding_, X=X, fitted=model) == []


def test_harmonic_reads_the_kept_eigenvectors():
    residuals = [1.0, 0.1, 0.95, 0.3]
    assert [d.coordinate for d in harmonic_coordinates(residuals)] == [2, 4]
    assert harmonic_coordinates(residuals, [0, 2]) == []
    found = harmonic_coordinates(residuals, [0, 3])
    assert [(d.coordinate, d.value) for d in found] == [(2, 0.3)]


def test_quick_suite_two_moons_graph_splits_and_one_moon_collapses_to_a_point():
    # Issue 13: the k = 10 graph on the quick suite's two moons (n = 600, noise 0.05) splits
    # in two, and the eigenvectors are constant on a component (von Luxburg 2007): one moon
    # lands on a point, the other on a segment.
    moons = datasets.load({"name": "two_moons", "n": 600, "noise": 0.05, "seed": 0})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DisconnectedGraphWarning)
        model = LaplacianEigenmaps(n_neighbors=10, random_state=0).fit(moons.X)
    assert model.n_connected_components_ == 2
    found = [
        d
        for d in find_degeneracies(model.embedding_, X=moons.X, fitted=model)
        if d.kind == "collapsed_component"
    ]
    assert sorted(d.size for d in found) == [300, 300]
    shapes = sorted("a point" if "a point" in d.explanation else "a segment" for d in found)
    assert shapes == ["a point", "a segment"]
    assert all(d.value < 1e-6 for d in found)
    # each component is one moon
    count, labels = graph_components(moons.X, 10)
    assert count == 2
    for label in range(2):
        assert np.unique(moons.labels[labels == label]).size == 1


def test_a_recorded_split_without_the_data_is_still_named():
    Y = gaussian(200)
    found = find_degeneracies(Y, fitted={"n_connected_components_": 3})
    assert [(d.kind, d.value) for d in found] == [("collapsed_component", 3.0)]


def test_connected_components_of_a_healthy_embedding_do_not_collapse():
    Y = gaussian(300)
    assert collapsed_components(Y, np.repeat([0, 1, 2], 100)) == []


def test_near_identical_rows_are_found_without_the_graph():
    Y = gaussian(500)
    Y[:40] = [3.0, -1.0] + 1e-9 * gaussian(40, seed=1)
    found = duplicate_clusters(Y)
    assert [(d.kind, d.size) for d in found] == [("collapsed_component", 40)]
    assert found[0].value < 1e-6
    assert duplicate_clusters(gaussian(500)) == []


def test_a_flat_coordinate():
    Y = gaussian(400)
    Y[:, 1] *= 1e-3  # variance share 1e-6
    found = flat_coordinates(Y)
    assert [(d.kind, d.coordinate) for d in found] == [("flat_coordinate", 2)]
    assert found[0].value == pytest.approx(Y[:, 1].var() / Y.var(axis=0).sum())
    assert flat_coordinates(gaussian(400)) == []


def test_variance_in_a_few_points():
    Y = gaussian(1000)
    Y[:5] *= 1000.0
    found = concentrated_variance(Y)
    assert [(d.kind, d.size) for d in found] == [("concentrated_variance", 10)]
    assert found[0].value > 0.99


def test_a_gaussian_clouds_top_percent_carries_its_chi_square_share():
    # Exact fact: for a 2-D standard Gaussian |y|^2 is chi-square with 2 degrees of freedom,
    # and the top 1 % (beyond q = chi2.ppf(0.99, 2)) carries E[|y|^2; |y|^2 > q] / 2 =
    # (q + 2) exp(-q / 2) / 2 = 0.056 of the total; far below the threshold of one half.
    Y = gaussian(200_000, seed=3)
    q = chi2.ppf(0.99, 2)
    found = concentrated_variance(Y, threshold=0.0)
    assert found[0].value == pytest.approx((q + 2) * np.exp(-q / 2) / 2, abs=0.003)
    assert concentrated_variance(Y) == []


def test_kernel_extremes_on_a_constructed_cloud():
    X = gaussian(500)
    median = np.median(np.linalg.norm(X[:, None] - X[None], axis=2)[np.triu_indices(500, 1)])
    # sigma = 10 x the median distance: two typical points weigh exp(-1/200) = 0.995
    found = kernel_extremes(X, 10 * median)
    assert [d.kind for d in found] == ["kernel_constant"]
    assert found[0].value == pytest.approx(np.exp(-1 / 200), rel=1e-12)
    # a bandwidth far below the nearest-neighbour distances: the kernel is nearly the identity
    found = kernel_extremes(X, 0.005)
    assert [d.kind for d in found] == ["kernel_diagonal"] and found[0].value < 0.1
    # the median rule: the median pair weighs exp(-1/2) = 0.61, and neighbours weigh a lot
    assert kernel_extremes(X, median) == []


def test_kernel_pca_with_a_huge_bandwidth_is_named():
    X = gaussian(300, d=3)
    model = KernelPCA(bandwidth=1e3).fit(X)
    found = find_degeneracies(model.embedding_, X=X, fitted=model)
    assert [d.kind for d in found] == ["kernel_constant"]
    # the same from a plain record of the fitted attributes
    record = {"bandwidth_": model.bandwidth_, "kernel": "rbf"}
    assert find_degeneracies(model.embedding_, X=X, fitted=record) == found
    assert find_degeneracies(model.embedding_, X=X, fitted={**record, "kernel": "laplacian"}) == []


def test_records_are_plain():
    found = harmonic_coordinates([1.0, 0.2])
    record = found[0].as_dict()
    assert set(record) == {
        "kind",
        "value",
        "threshold",
        "explanation",
        "coordinate",
        "component",
        "size",
    }
    assert record["kind"] in KINDS
    assert_allclose(record["value"], 0.2)


def test_near_identical_rows_of_a_large_embedding_are_counted_on_every_row():
    Y = gaussian(50_000)
    Y[:1_000] = [3.0, -1.0] + 1e-9 * gaussian(1_000, seed=1)  # 2 % of the rows on one point
    found = duplicate_clusters(Y, random_state=3)
    assert [(d.kind, d.size) for d in found] == [("collapsed_component", 1_000)]
    assert found[0].value < 1e-6
    assert duplicate_clusters(gaussian(50_000), random_state=3) == []


def test_the_duplicate_search_on_a_dense_curve_stays_small():
    # An embedding drawn as a curve (a harmonic coordinate): every row has hundreds of rows
    # within the collapse radius, and a radius graph over all 200,000 rows would hold tens of
    # millions of pairs. The search looks at a sample, so its memory does not grow with n.
    t = np.random.default_rng(0).uniform(-1.0, 1.0, 200_000)
    Y = np.column_stack([t, t**2])
    tracemalloc.start()
    found = duplicate_clusters(Y)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert found == []
    assert peak < 64 * 2**20
