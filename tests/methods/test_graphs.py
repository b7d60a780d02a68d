"""Tests for the neighbour graphs, components, the disconnected-graph policy and Laplacians."""

import numpy as np
import pytest
import scipy.sparse
import scipy.sparse.csgraph
from numpy.testing import assert_allclose
from sklearn.neighbors import kneighbors_graph, radius_neighbors_graph

from lowdim.errors import InputError
from lowdim.methods._eigen import smallest_laplacian_eigenpairs
from lowdim.methods._graphs import (
    DisconnectedGraphWarning,
    components,
    degrees,
    disconnected_policy,
    edge_rows,
    epsilon_distance_graph,
    knn_distance_graph,
    laplacian,
    query_distance_graph,
    symmetrize,
)


@pytest.fixture
def points():
    return np.random.default_rng(0).normal(size=(60, 3))


def _two_triangles():
    """Two 3-cliques (nodes 0-2 and 3-5), unit weights, no edge between them."""
    W = np.zeros((6, 6))
    W[:3, :3] = 1.0
    W[3:, 3:] = 1.0
    np.fill_diagonal(W, 0.0)
    return scipy.sparse.csr_matrix(W)


def test_knn_graph_matches_scikit_learn(points):
    # Outside reference: sklearn.neighbors.kneighbors_graph(mode="distance"), self excluded.
    graph = knn_distance_graph(points, 5)
    expected = kneighbors_graph(points, 5, mode="distance", include_self=False)
    assert_allclose(graph.distances.toarray(), expected.toarray())
    assert_allclose(graph.radii, expected.max(axis=1).toarray().ravel())
    assert np.all(np.diff(graph.distances.indptr) == 5)
    assert np.all(graph.distances.diagonal() == 0)


def test_duplicate_points_keep_their_zero_distance_edge():
    X = np.array([[0.0], [0.0], [1.0], [3.0]])
    graph = knn_distance_graph(X, 1)
    assert graph.distances.nnz == 4  # the zero distance between 0 and 1 is stored
    assert graph.distances[0, 1] == 0.0 and graph.distances.has_sorted_indices


def test_epsilon_graph_matches_scikit_learn(points):
    # Outside reference: sklearn.neighbors.radius_neighbors_graph(mode="distance").
    graph = epsilon_distance_graph(points, 1.0)
    expected = radius_neighbors_graph(points, 1.0, mode="distance", include_self=False)
    assert_allclose(graph.distances.toarray(), expected.toarray())
    assert_allclose(graph.radii, 1.0)


def test_symmetrize_union_and_intersection_against_dense_oracle(points):
    graph = knn_distance_graph(points, 4).distances
    W = graph.copy()
    W.data = np.exp(-(W.data**2))
    dense = W.toarray()
    assert_allclose(symmetrize(W, "union").toarray(), np.maximum(dense, dense.T))
    assert_allclose(symmetrize(W, "intersection").toarray(), np.minimum(dense, dense.T))
    with pytest.raises(ValueError, match="`mode`"):
        symmetrize(W, "both")


def test_edge_rows_align_with_data(points):
    graph = knn_distance_graph(points, 3).distances
    rows = edge_rows(graph)
    coo = graph.tocoo()
    assert np.array_equal(rows, coo.row)


@pytest.mark.parametrize("normalization", ["unnormalized", "symmetric", "random_walk"])
def test_laplacian_matches_scipy_csgraph(points, normalization):
    # Outside reference: scipy.sparse.csgraph.laplacian (normed=False: D - W; normed=True:
    # I - D^-1/2 W D^-1/2).
    W = symmetrize(knn_distance_graph(points, 6).distances)
    L, d, null = laplacian(W, normalization)
    expected = scipy.sparse.csgraph.laplacian(W, normed=normalization != "unnormalized")
    assert_allclose(L.toarray(), expected.toarray(), atol=1e-12)
    assert_allclose(d, W.toarray().sum(axis=1))
    assert_allclose(L @ null, 0.0, atol=1e-12)
    assert_allclose(np.linalg.norm(null), 1.0)


def test_laplacian_refuses_isolated_nodes():
    W = scipy.sparse.csr_matrix(np.array([[0, 1, 0], [1, 0, 0], [0, 0, 0]], dtype=float))
    with pytest.raises(ValueError, match="isolated nodes"):
        laplacian(W, "symmetric")


def test_two_triangles_spectrum_and_components():
    # Exact fact (REFERENCES.md, Laplacian eigenmaps): two 3-cliques give the normalized
    # Laplacian eigenvalues 0, 0, 1.5 (x4); the eigenvalue 0 once per component.
    W = _two_triangles()
    count, labels = components(W)
    assert count == 2
    assert np.array_equal(labels, [0, 0, 0, 1, 1, 1])
    L, _, _ = laplacian(W, "symmetric")
    values = smallest_laplacian_eigenpairs(L, 6, solver="dense").values
    assert_allclose(values, [0, 0, 1.5, 1.5, 1.5, 1.5], atol=1e-12)
    assert_allclose(degrees(W), 2.0)


def test_disconnected_policy_warn_raise_largest():
    W = scipy.sparse.block_diag([_two_triangles(), _two_triangles()[:2, :2]]).tocsr()
    with pytest.warns(DisconnectedGraphWarning, match=r"3 connected components \(sizes 3, 3, 2\)"):
        count, keep = disconnected_policy(W, "warn", "LaplacianEigenmaps")
    assert count == 3 and keep is None
    with pytest.raises(InputError, match="`LaplacianEigenmaps` has 3 connected components"):
        disconnected_policy(W, "raise", "LaplacianEigenmaps", hint="raise n_neighbors")
    with pytest.warns(DisconnectedGraphWarning, match="largest component \\(3 points\\)"):
        count, keep = disconnected_policy(W, "largest", "DiffusionMaps")
    assert np.array_equal(keep, [0, 1, 2])  # a tie in size goes to the first component


def test_connected_graph_passes_silently(points):
    W = symmetrize(knn_distance_graph(points, 8).distances)
    assert disconnected_policy(W, "raise", "LaplacianEigenmaps") == (1, None)


@pytest.mark.parametrize("kind", ["knn", "mutual_knn", "epsilon"])
def test_query_of_training_points_reproduces_the_training_graph(points, kind):
    if kind == "epsilon":
        graph = epsilon_distance_graph(points, 1.2)
    else:
        graph = knn_distance_graph(points, 5)
    _assert_query_reproduces(graph, points, kind)


@pytest.mark.parametrize("kind", ["knn", "mutual_knn"])
def test_a_neighbour_exactly_at_the_radius_is_kept(kind):
    # On the quick suite's swiss roll (k = 10) a point's 10th neighbour sits exactly at the
    # radius of the tree's radius search, which rounds it out; a training point passed again
    # must still get its training row (issue 13: the Nyström extension missed two rows).
    from lowdim import datasets

    roll = datasets.load({"name": "swiss_roll", "n": 800, "noise": 0.05, "seed": 0})
    _assert_query_reproduces(knn_distance_graph(roll.X, 10), roll.X, kind)


def _assert_query_reproduces(graph, points, kind):
    # distances + 1 so that symmetrize's positive-weight rule keeps every edge
    shifted = graph.distances.copy()
    shifted.data += 1.0
    mode = "intersection" if kind == "mutual_knn" else "union"
    expected = symmetrize(shifted, mode)
    expected.data -= 1.0
    lonely = np.diff(expected.indptr) == 0  # no edge in training: joined to a neighbour
    got = query_distance_graph(graph, points, kind)
    assert np.all(np.diff(got.indptr)[lonely] == 1)
    got, expected = got[~lonely], expected[~lonely]
    assert np.array_equal(got.indptr, expected.indptr)
    assert np.array_equal(got.indices, expected.indices)
    assert_allclose(got.data, expected.data, atol=1e-12)
    with_self = query_distance_graph(graph, points, kind, include_self=True)
    assert with_self[~lonely].nnz == got.nnz + int(np.sum(~lonely))
    assert np.all(with_self.diagonal() == 0)


def test_query_far_point_falls_back_to_nearest_training_points(points):
    graph = epsilon_distance_graph(points, 0.5)
    far = np.full((1, 3), 100.0)
    got = query_distance_graph(graph, far, "epsilon", fallback_neighbors=3)
    nearest = np.sort(np.linalg.norm(points - far, axis=1))[:3]
    assert_allclose(np.sort(got.data), nearest)
