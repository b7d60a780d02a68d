"""Generated manifolds: determinism, agreement with scikit-learn, published recipes, truth."""

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats
from scipy.sparse.csgraph import dijkstra
from scipy.spatial.distance import cdist
from sklearn import datasets as skd
from sklearn.neighbors import kneighbors_graph

from lowdim.datasets import dataset_names, describe, load
from lowdim.datasets.manifolds import (
    coiled_ring_map,
    peaked_sheet_map,
    s_curve_map,
    swiss_roll_arclength,
    swiss_roll_map,
)
from lowdim.errors import InputError

GENERATED = [n for n in dataset_names() if describe(n)["kind"] == "generated"]


def _roll_t(X):
    # For (t cos t, h, t sin t) the distance from the roll's axis is t itself.
    return np.hypot(X[:, 0], X[:, 2])


def test_all_eleven_families_are_registered():
    assert sorted(GENERATED) == sorted(
        [
            "swiss_roll",
            "swiss_hole",
            "s_curve",
            "two_moons",
            "circles",
            "coiled_ring",
            "peaked_sheet",
            "swiss_gap",
            "torus",
            "severed_sphere",
            "blobs",
        ]
    )


@pytest.mark.parametrize("name", GENERATED)
def test_deterministic_in_seed(name):
    spec = {"name": name, "n": 300, "noise": 0.05, "seed": 3}
    a, b = load(spec), load(spec)
    assert_array_equal(a.X, b.X)
    assert a.X.dtype == np.float64 and a.X.shape[0] == 300
    if a.truth is not None:
        assert_array_equal(a.truth, b.truth)
        assert a.truth.shape[0] == 300
    c = load({**spec, "seed": 4})
    assert not np.allclose(a.X, c.X)


@pytest.mark.parametrize("name", GENERATED)
def test_noise_is_gaussian_with_sd_noise_after_the_lift(name):
    base = {"name": name, "n": 2000, "seed": 1, "ambient_dim": 6 if name != "blobs" else None}
    clean, noisy = load(base), load({**base, "noise": 0.2})
    diff = noisy.X - clean.X
    # Every ambient coordinate gets noise of sd 0.2, including the ones the lift adds.
    assert_allclose(diff.std(axis=0), 0.2, rtol=0.1)
    assert abs(diff.mean()) < 0.02


# --- agreement with scikit-learn's generators


def test_swiss_roll_matches_make_swiss_roll():
    # sklearn.datasets.make_swiss_roll: our map applied to its parameters gives its points.
    X_ref, t_ref = skd.make_swiss_roll(2000, noise=0.0, random_state=0)
    assert_allclose(swiss_roll_map(t_ref, X_ref[:, 1]), X_ref, atol=1e-12)
    # ... and our parameters follow its laws: t uniform on [1.5 pi, 4.5 pi], height on [0, 21].
    ours = load({"name": "swiss_roll", "n": 2000, "seed": 0}).X
    assert stats.ks_2samp(_roll_t(ours), t_ref).pvalue > 0.01
    assert stats.ks_2samp(ours[:, 1], X_ref[:, 1]).pvalue > 0.01


def test_swiss_roll_with_height_30_is_the_published_recipe():
    # TiCC TR 2009-005 App. B: t = (3 pi / 2)(1 + 2p), x = (t cos t, t sin t, 30 q) with p, q
    # uniform on [0, 1]; our coordinates are in scikit-learn's order (t cos t, height, t sin t).
    data = load({"name": "swiss_roll", "n": 3000, "height": 30, "seed": 0})
    t = _roll_t(data.X)
    p, q = (t / (1.5 * np.pi) - 1) / 2, data.X[:, 1] / 30
    assert_allclose(data.X[:, [0, 2]], np.column_stack([t * np.cos(t), t * np.sin(t)]), atol=1e-9)
    assert stats.kstest(p, "uniform").pvalue > 0.01
    assert stats.kstest(q, "uniform").pvalue > 0.01


def test_swiss_roll_truth_is_arc_length_and_height():
    data = load({"name": "swiss_roll", "n": 500, "seed": 2})
    t = _roll_t(data.X)
    # Arc length of (t cos t, t sin t): integral of sqrt(1 + t^2), checked by quadrature.
    grid = np.linspace(1.5 * np.pi, t.max(), 20001)
    numeric = np.trapezoid(np.sqrt(1 + grid**2), grid)
    exact = swiss_roll_arclength(t.max()) - swiss_roll_arclength(1.5 * np.pi)
    assert_allclose(numeric, exact, rtol=1e-8)
    assert_allclose(data.truth[:, 0], swiss_roll_arclength(t) - swiss_roll_arclength(1.5 * np.pi))
    assert_allclose(data.truth[:, 1], data.X[:, 1])


def test_swiss_hole_matches_make_swiss_roll_with_hole():
    # sklearn.datasets.make_swiss_roll(hole=True) cuts the centre cell of a 3 x 3 grid over
    # t in [1.5 pi, 4.5 pi] and height in [0, 21]: our default hole of 1/3 is that cell.
    X_ref, t_ref = skd.make_swiss_roll(3000, hole=True, random_state=0)
    ours = load({"name": "swiss_hole", "n": 3000, "seed": 0}).X
    t = _roll_t(ours)
    for tt, h in ((t, ours[:, 1]), (t_ref, X_ref[:, 1])):
        inside = (tt > 2.5 * np.pi) & (tt < 3.5 * np.pi) & (h > 7) & (h < 14)
        assert not inside.any()
    assert stats.ks_2samp(t, t_ref).pvalue > 0.01
    assert stats.ks_2samp(ours[:, 1], X_ref[:, 1]).pvalue > 0.01


def test_s_curve_matches_make_s_curve():
    # sklearn.datasets.make_s_curve: the map on its parameters, and the same parameter laws.
    X_ref, t_ref = skd.make_s_curve(2000, random_state=0)
    assert_allclose(s_curve_map(t_ref, X_ref[:, 1]), X_ref, atol=1e-12)
    data = load({"name": "s_curve", "n": 2000, "seed": 0})
    assert stats.ks_2samp(data.truth[:, 0], t_ref).pvalue > 0.01
    assert stats.ks_2samp(data.X[:, 1], X_ref[:, 1]).pvalue > 0.01


def _sorted_rows(X, y):
    # Rounded keys, so that points differing by rounding only sort the same way.
    key = np.round(X, 9)
    order = np.lexsort((key[:, 1], key[:, 0]))
    return X[order], y[order]


def test_two_moons_equal_make_moons():
    # sklearn.datasets.make_moons places the points equally spaced in angle: same point set.
    X_ref, y_ref = skd.make_moons(301, noise=None, random_state=0)
    data = load({"name": "two_moons", "n": 301, "seed": 5})
    X, y = _sorted_rows(data.X, data.labels)
    X_ref, y_ref = _sorted_rows(X_ref, y_ref)
    assert_allclose(X, X_ref, atol=1e-12)
    assert_array_equal(y, y_ref)


def test_circles_equal_make_circles():
    # sklearn.datasets.make_circles(factor=0.5): same point set and classes.
    X_ref, y_ref = skd.make_circles(200, factor=0.5, noise=None, random_state=0)
    data = load({"name": "circles", "n": 200, "factor": 0.5, "seed": 1})
    X, y = _sorted_rows(data.X, data.labels)
    X_ref, y_ref = _sorted_rows(X_ref, y_ref)
    assert_allclose(X, X_ref, atol=1e-12)
    assert_array_equal(y, y_ref)


def test_blobs_follow_make_blobs():
    # sklearn.datasets.make_blobs: n // centers points per blob, the remainder to the first
    # blobs, centres in [-10, 10]^dim, isotropic clusters of sd cluster_std.
    _, y_ref = skd.make_blobs(1003, centers=4, n_features=3, random_state=0)
    data = load({"name": "blobs", "n": 1003, "centers": 4, "dim": 3, "cluster_std": 0.5})
    assert_array_equal(np.bincount(data.labels), np.bincount(y_ref))
    assert data.truth is None and data.X.shape == (1003, 3)
    for k in range(4):
        members = data.X[data.labels == k]
        assert np.all(np.abs(members.mean(axis=0)) < 10 + 0.2)
        assert_allclose(members.std(axis=0), 0.5, rtol=0.2)


# --- published recipes where no scikit-learn generator exists


def test_swiss_gap_removes_the_band():
    # TiCC TR 2009-005 App. B: t = (3 pi / 2)(1 + 2p); the gap 0.4 < p < 0.8 matches its figure
    # (REFERENCES.md notes the printed condition is garbled).
    data = load({"name": "swiss_gap", "n": 3000, "seed": 0})
    p = (_roll_t(data.X) / (1.5 * np.pi) - 1) / 2
    assert not np.any((p > 0.4) & (p < 0.8))
    assert_array_equal(data.labels, (p >= 0.4).astype(int))
    # Uniform on what is left: the piece [0.8, 1] holds a third of the points.
    assert abs(np.mean(p >= 0.8) - 1 / 3) < 0.03
    wider = load({"name": "swiss_gap", "n": 3000, "gap": 0.5, "seed": 0})
    q = (_roll_t(wider.X) / (1.5 * np.pi) - 1) / 2
    assert not np.any((q > 0.4) & (q < 0.9))


def test_coiled_ring_follows_the_published_formula():
    # TiCC TR 2009-005 App. B: x = ((2 + cos 8p) cos p, (2 + cos 8p) sin p, sin 8p).
    data = load({"name": "coiled_ring", "n": 500, "seed": 0})
    p = data.truth[:, 0]
    assert_allclose(np.hypot(data.X[:, 0], data.X[:, 1]), 2 + np.cos(8 * p), atol=1e-12)
    assert_allclose(data.X[:, 2], np.sin(8 * p), atol=1e-12)
    assert_allclose(coiled_ring_map(p), data.X)
    assert p.min() >= 0 and p.max() <= 2 * np.pi


def test_peaked_sheet_follows_the_published_formula():
    # TiCC TR 2009-005 App. B as corrected in REFERENCES.md: with p, q uniform on [0, 1],
    # x = (1 - 2p, 1 - 2q, sin(pi - 2 pi p) tanh(3 - 6q)).
    data = load({"name": "peaked_sheet", "n": 500, "seed": 0})
    p, q = (1 - data.X[:, 0]) / 2, (1 - data.X[:, 1]) / 2
    assert_allclose(data.X[:, 2], np.sin(np.pi - 2 * np.pi * p) * np.tanh(3 - 6 * q), atol=1e-12)
    assert_allclose(peaked_sheet_map(data.truth[:, 0], data.truth[:, 1], 1.0), data.X)


def test_torus_is_uniform_by_area():
    # Exact fact: the area element (R + r cos phi) dtheta dphi puts a share 1/2 + r / (pi R)
    # of the surface on the outer half (cos phi > 0).
    data = load({"name": "torus", "n": 20000, "seed": 0})
    phi = data.truth[:, 1]
    assert abs(np.mean(np.cos(phi) > 0) - (0.5 + 1 / (2 * np.pi))) < 0.015
    radial = np.hypot(data.X[:, 0], data.X[:, 1])
    assert_allclose((radial - 2) ** 2 + data.X[:, 2] ** 2, 1.0, atol=1e-12)


def test_severed_sphere_has_its_caps_and_slice_removed():
    # The scikit-learn example 'Manifold learning methods on a severed sphere'.
    data = load({"name": "severed_sphere", "n": 2000, "seed": 0})
    assert_allclose(np.linalg.norm(data.X, axis=1), 1.0)
    colatitude = np.arccos(data.X[:, 2])
    assert colatitude.min() >= np.pi / 8 - 1e-12 and colatitude.max() <= 7 * np.pi / 8 + 1e-12
    longitude = np.mod(np.arctan2(data.X[:, 1], data.X[:, 0]), 2 * np.pi)
    assert longitude.max() <= 2 * np.pi - 0.55 + 1e-12


# --- truth is intrinsic


def _geodesic_spearman(X, truth, k=10, sources=40):
    graph = kneighbors_graph(X, k, mode="distance")
    graph = graph.maximum(graph.T)
    idx = np.arange(0, X.shape[0], X.shape[0] // sources)
    geodesic = dijkstra(graph, directed=False, indices=idx)
    intrinsic = cdist(truth[idx], truth)
    keep = np.isfinite(geodesic) & (geodesic > 0)
    return stats.spearmanr(geodesic[keep], intrinsic[keep]).statistic


@pytest.mark.parametrize("name", ["swiss_roll", "s_curve"])
def test_knn_geodesics_track_truth_distances(name):
    # Common practice (Isomap's premise): on a noise-free developable surface, shortest paths
    # in a kNN graph approximate geodesic distances, which equal distances in the flat truth.
    data = load({"name": name, "n": 1500, "seed": 0})
    assert _geodesic_spearman(data.X, data.truth) > 0.97


def test_euclidean_distances_in_3d_do_not_track_the_roll_truth():
    # The check above can fail: straight-line distances across the roll do not follow truth.
    data = load({"name": "swiss_roll", "n": 1500, "seed": 0})
    idx = np.arange(0, 1500, 37)
    straight = cdist(data.X[idx], data.X)
    intrinsic = cdist(data.truth[idx], data.truth)
    assert stats.spearmanr(straight.ravel(), intrinsic.ravel()).statistic < 0.9


# --- stress axes and labels


def test_density_warps_the_first_coordinate_by_the_documented_law():
    # lift.warp_uniform: density a gives f(x) = a exp(a x) / (exp(a) - 1) on [0, 1].
    a = 2.0
    data = load({"name": "swiss_roll", "n": 3000, "density": a, "seed": 0})
    p = (_roll_t(data.X) / (1.5 * np.pi) - 1) / 2
    cdf = lambda x: np.expm1(a * x) / np.expm1(a)  # noqa: E731
    assert stats.kstest(p, cdf).pvalue > 0.01
    assert stats.kstest(p, "uniform").pvalue < 1e-6


def test_checker_labels_follow_the_generating_parameters():
    data = load({"name": "swiss_roll", "n": 2000, "labels": "checker:5x3", "seed": 0})
    p = (_roll_t(data.X) / (1.5 * np.pi) - 1) / 2
    q = data.X[:, 1] / 21
    expected = (np.floor(5 * p).astype(int) + np.floor(3 * q).astype(int)) % 2
    assert_array_equal(data.labels, expected)


def test_band_labels_on_a_curve():
    data = load({"name": "coiled_ring", "n": 4000, "labels": "bands:4", "seed": 0})
    assert_array_equal(data.labels, np.floor(data.truth[:, 0] / (2 * np.pi) * 4).astype(int))
    assert_allclose(np.bincount(data.labels) / 4000, 0.25, atol=0.03)


@pytest.mark.parametrize(
    ("spec", "words"),
    [
        ({"name": "coiled_ring", "labels": "checker:2x2"}, "two intrinsic coordinates"),
        ({"name": "swiss_roll", "labels": "classes"}, "no natural classes"),
        ({"name": "swiss_roll", "ambient_dim": 2}, r"an int in \[3, inf\), got 2"),
        ({"name": "blobs", "dim": 5, "ambient_dim": 4}, "native dimension 5"),
        ({"name": "torus", "minor_radius": 3.0}, "must be less than `major_radius`"),
        ({"name": "blobs", "labels": "bands:3"}, "no intrinsic coordinates"),
    ],
)
def test_parameters_that_do_not_fit_the_family(spec, words):
    with pytest.raises(InputError, match=words):
        load(spec)
