"""Neighbour graphs, their connected components and their Laplacians, all sparse.

The graph methods build on three steps kept here: a directed distance graph from
``sklearn.neighbors.NearestNeighbors`` (k nearest neighbours or a radius, self excluded),
edge weights computed on its stored entries, and a symmetrisation (union for a kNN graph,
intersection for a mutual kNN graph). Nothing here forms an n x n dense matrix.

A disconnected graph is never embedded silently: :func:`disconnected_policy` warns with the
number of components and their sizes, raises, or keeps the largest component, and
:func:`fit_by_policy` runs a graph method's fit under that policy.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any, NamedTuple

import numpy as np
import scipy.sparse
import scipy.sparse.csgraph
from sklearn.neighbors import NearestNeighbors

from lowdim.errors import InputError
from lowdim.methods._kernels import DEFAULT_LOCAL_K, Bandwidth

__all__ = [
    "GRAPHS",
    "NORMALIZATIONS",
    "ON_DISCONNECTED",
    "DisconnectedGraphWarning",
    "DistanceGraph",
    "knn_distance_graph",
    "epsilon_distance_graph",
    "edge_rows",
    "query_distance_graph",
    "default_neighbors",
    "local_rule_for",
    "log_weights",
    "row_average",
    "symmetrize",
    "components",
    "disconnected_policy",
    "fit_by_policy",
    "degrees",
    "laplacian",
]

GRAPHS = ("knn", "mutual_knn", "epsilon")
NORMALIZATIONS = ("unnormalized", "symmetric", "random_walk")
ON_DISCONNECTED = ("warn", "raise", "largest")


class DisconnectedGraphWarning(UserWarning):
    """The neighbour graph has more than one connected component."""


class DistanceGraph(NamedTuple):
    """A directed distance graph and the neighbour index that built it.

    ``distances`` is CSR with the distance from i to each of its neighbours in row i (the
    point itself excluded; zero distances between duplicate points are stored explicitly).
    ``radii`` holds each point's distance to its k-th neighbour for a kNN graph, or the
    radius for an epsilon graph.
    """

    distances: scipy.sparse.csr_matrix
    index: NearestNeighbors
    radii: np.ndarray


def knn_distance_graph(
    X: np.ndarray, n_neighbors: int, *, n_jobs: int | None = None
) -> DistanceGraph:
    """Return the directed k-nearest-neighbour distance graph of the rows of ``X``.

    A kd-tree or ball tree is chosen by scikit-learn for the data; the query excludes each
    point from its own list. ``n_jobs`` parallel workers run the search (and later queries).
    """
    n = X.shape[0]
    index = NearestNeighbors(n_neighbors=n_neighbors, n_jobs=n_jobs).fit(X)
    dist, ind = index.kneighbors(return_distance=True)
    indptr = np.arange(0, n * n_neighbors + 1, n_neighbors)
    graph = scipy.sparse.csr_matrix((dist.ravel(), ind.ravel(), indptr), shape=(n, n))
    return DistanceGraph(graph, index, dist[:, -1].copy())


def epsilon_distance_graph(
    X: np.ndarray, radius: float, *, n_jobs: int | None = None
) -> DistanceGraph:
    """Return the distance graph joining every pair of rows closer than ``radius``."""
    n = X.shape[0]
    index = NearestNeighbors(radius=radius, n_jobs=n_jobs).fit(X)
    graph = index.radius_neighbors_graph(mode="distance", sort_results=True)
    return DistanceGraph(graph.tocsr(), index, np.full(n, float(radius)))


def edge_rows(graph: scipy.sparse.csr_matrix) -> np.ndarray:
    """Row index of every stored entry of a CSR matrix, aligned with ``graph.data``."""
    return np.repeat(np.arange(graph.shape[0]), np.diff(graph.indptr))


def symmetrize(W: scipy.sparse.csr_matrix, mode: str = "union") -> scipy.sparse.csr_matrix:
    """Make a graph of positive weights symmetric.

    ``"union"`` keeps an edge present in either direction (``max(W, W^T)``), ``"intersection"``
    only edges present in both (``min(W, W^T)``, the mutual kNN graph). Weights of a symmetric
    kernel are equal in both directions, so either is also the kernel on the symmetric graph.
    """
    WT = W.T.tocsr()
    if mode == "union":
        S = W.maximum(WT)
    elif mode == "intersection":
        S = W.minimum(WT)
    else:
        raise ValueError(f"`mode` must be 'union' or 'intersection', got {mode!r}")
    S = scipy.sparse.csr_matrix(S)
    S.eliminate_zeros()
    S.sort_indices()
    return S


def components(W: scipy.sparse.spmatrix) -> tuple[int, np.ndarray]:
    """Number of connected components of an undirected graph and each node's component."""
    count, labels = scipy.sparse.csgraph.connected_components(W, directed=False)
    return int(count), labels


def disconnected_policy(
    W: scipy.sparse.spmatrix,
    policy: str,
    owner: str,
    *,
    hint: str = "",
    stacklevel: int = 3,
) -> tuple[int, np.ndarray | None]:
    """Apply the policy for a disconnected graph; return the count and the points to keep.

    Returns ``(n_components, keep)`` where ``keep`` is None when every point is kept and
    otherwise the sorted indices of the largest component (the lowest component label wins a
    tie in size). ``"warn"`` keeps every point and warns, ``"raise"`` raises an InputError,
    ``"largest"`` warns and returns the largest component. ``hint`` says how to connect it;
    ``stacklevel`` points the warning at the caller of the estimator's ``fit``.
    """
    count, labels = components(W)
    if count == 1:
        return 1, None
    sizes = np.bincount(labels)
    shown = ", ".join(str(s) for s in sorted(sizes, reverse=True)[:10])
    if count > 10:
        shown += ", ..."
    what = (
        f"the neighbour graph of `{owner}` has {count} connected components "
        f"(sizes {shown}) in {labels.size} points"
    )
    fix = hint or "connect the graph with more neighbours"
    if policy == "raise":
        raise InputError(
            f"{what}; {fix}, or set on_disconnected='warn' or 'largest' to embed it anyway"
        )
    if policy == "warn":
        warnings.warn(
            f"{what}: the leading coordinates only tell the components apart; {fix}, or set "
            "on_disconnected='largest' to embed the largest component",
            DisconnectedGraphWarning,
            stacklevel=stacklevel,
        )
        return count, None
    if policy == "largest":
        biggest = int(np.argmax(sizes))
        keep = np.flatnonzero(labels == biggest)
        warnings.warn(
            f"{what}: embedding the largest component ({keep.size} points); the other "
            f"{labels.size - keep.size} points are listed in `excluded_` and placed by the "
            "out-of-sample extension",
            DisconnectedGraphWarning,
            stacklevel=stacklevel,
        )
        return count, keep
    raise ValueError(f"`policy` must be one of {ON_DISCONNECTED}, got {policy!r}")


def fit_by_policy(
    X: np.ndarray,
    W: scipy.sparse.spmatrix,
    built: Any,
    *,
    policy: str,
    owner: str,
    hint: str,
    n_components: int,
    build: Callable[[np.ndarray], Any],
    solve: Callable[[np.ndarray, Any], np.ndarray],
    extend: Callable[[np.ndarray], np.ndarray],
    graph_name: str = "graph",
    too_few_fix: str = "raise `n_neighbors` or lower `n_components`",
) -> tuple[int, np.ndarray, np.ndarray]:
    """Fit a graph method on ``X`` under the policy for a disconnected graph.

    ``W`` is the graph of ``X`` and ``built`` whatever ``build(X)`` returned for it. Under
    ``"largest"`` the method is rebuilt and solved on the largest component only and the
    other points are placed by ``extend``, the fitted method's out-of-sample extension.
    ``solve(X_fit, built)`` fits the method and returns the embedding of ``X_fit``.
    ``graph_name`` and ``too_few_fix`` word the error for a component smaller than
    ``n_components + 1`` points.

    Returns ``(n_connected_components, excluded, embedding)``: the component count, the
    sorted indices left out of the fit, and one embedding row per point of ``X``.
    """
    count, keep = disconnected_policy(W, policy, owner, hint=hint, stacklevel=4)
    if keep is None:
        return count, np.zeros(0, dtype=np.intp), solve(X, built)
    n = X.shape[0]
    excluded = np.setdiff1d(np.arange(n), keep)
    X_fit = X[keep]
    if n_components + 1 > X_fit.shape[0]:
        raise InputError(
            f"the largest component of the {graph_name} of `{owner}` has {X_fit.shape[0]} "
            f"points, too few for n_components={n_components}; {too_few_fix}"
        )
    inner = solve(X_fit, build(X_fit))
    full = np.empty((n, inner.shape[1]))
    full[keep] = inner
    full[excluded] = extend(X[excluded])
    return count, excluded, full


def degrees(W: scipy.sparse.spmatrix) -> np.ndarray:
    """Row sums of a weight matrix, as a flat float64 array."""
    return np.asarray(W.sum(axis=1), dtype=np.float64).ravel()


def laplacian(
    W: scipy.sparse.spmatrix, normalization: str
) -> tuple[scipy.sparse.csr_matrix, np.ndarray, np.ndarray]:
    """Return the graph Laplacian, the degree vector and the Laplacian's null vector.

    ``"unnormalized"``: L = D - W, null vector the ones. ``"symmetric"`` and ``"random_walk"``:
    L = I - D^-1/2 W D^-1/2 with null vector sqrt(d) (the random-walk eigenvectors are its
    eigenvectors divided by sqrt(d); the caller does that). Every degree must be positive.
    """
    d = degrees(W)
    if np.any(d <= 0):
        raise ValueError("the graph has isolated nodes; every degree must be positive")
    n = W.shape[0]
    eye = scipy.sparse.identity(n, format="csr")
    if normalization == "unnormalized":
        L = scipy.sparse.diags(d, format="csr") - W
        null = np.ones(n)
    elif normalization in ("symmetric", "random_walk"):
        s = 1.0 / np.sqrt(d)
        L = eye - scipy.sparse.diags(s) @ W @ scipy.sparse.diags(s)
        null = np.sqrt(d)
    else:
        raise ValueError(f"`normalization` must be one of {NORMALIZATIONS}, got {normalization!r}")
    L = scipy.sparse.csr_matrix(L)
    L.sort_indices()
    return L, d, null / np.linalg.norm(null)


def _coinciding(index: NearestNeighbors, X: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Nearest training point of each row of ``X`` and whether it lies at distance 0."""
    dist, ind = index.kneighbors(X, n_neighbors=1, return_distance=True)
    return ind[:, 0], dist[:, 0] == 0.0


# A radius search may leave out a point at exactly the radius (the tree compares rounded
# squared distances), which would drop a training point's edge to its k-th neighbour when the
# point is passed again; the searches and comparisons with a radius allow that much.
_ROUNDING = 1.0 + 1e-12


def query_distance_graph(
    graph: DistanceGraph,
    X: np.ndarray,
    kind: str,
    *,
    include_self: bool = False,
    fallback_neighbors: int = 1,
) -> scipy.sparse.csr_matrix:
    """Distances from new points ``X`` to the training points, under the training graph's rule.

    A new point that coincides with a training point (distance 0) is treated as that point:
    the match is dropped (``include_self=False``, graphs without self loops) or kept as an
    edge of distance 0 (``include_self=True``, kernels with k(x, x) = 1), and its other edges
    are those of the training point, so a training point passed again gets exactly its row of
    the training graph. The rules, with r_j a point's distance to its k-th neighbour:

    - ``"knn"`` (union): every j with d(x, x_j) <= max(r_x, r_j);
    - ``"mutual_knn"`` (intersection): every j among x's k nearest with d(x, x_j) <= r_j;
    - ``"epsilon"``: every j with d(x, x_j) <= radius.

    A new point left without any edge (possible for the mutual and epsilon rules) is joined to
    its ``fallback_neighbors`` nearest training points instead.
    """
    index, radii = graph.index, graph.radii
    m, n = X.shape[0], graph.distances.shape[0]
    if kind in ("knn", "mutual_knn"):
        k = int(np.diff(graph.distances.indptr[:2])[0])
        dist, ind = index.kneighbors(X, n_neighbors=min(k + 1, n), return_distance=True)
        nearest, same = ind[:, 0], dist[:, 0] == 0.0
        # the coinciding training point does not count among the k neighbours
        take = np.where(same[:, None], np.arange(1, k + 1), np.arange(k))
        dist = np.take_along_axis(dist, take, axis=1)
        ind = np.take_along_axis(ind, take, axis=1)
        if kind == "mutual_knn":
            keep = dist <= radii[ind] * _ROUNDING
            rows = np.repeat(np.arange(m), k).reshape(m, k)[keep]
            cols, vals = ind[keep], dist[keep]
        else:
            r_query = dist[:, -1]
            reach = float(max(np.max(r_query, initial=0.0), np.max(radii, initial=0.0)))
            reach *= _ROUNDING
            near_d, near_i = index.radius_neighbors(X, radius=reach, return_distance=True)
            counts = np.array([len(a) for a in near_i])
            rows = np.repeat(np.arange(m), counts)
            cols = np.concatenate(near_i) if m else np.zeros(0, dtype=np.intp)
            vals = np.concatenate(near_d) if m else np.zeros(0)
            keep = vals <= np.maximum(r_query[rows], radii[cols]) * _ROUNDING
            rows, cols, vals = rows[keep], cols[keep], vals[keep]
    elif kind == "epsilon":
        nearest, same = _coinciding(index, X)
        near_d, near_i = index.radius_neighbors(X, radius=float(radii[0]), return_distance=True)
        counts = np.array([len(a) for a in near_i])
        rows = np.repeat(np.arange(m), counts)
        cols = np.concatenate(near_i) if m else np.zeros(0, dtype=np.intp)
        vals = np.concatenate(near_d) if m else np.zeros(0)
    else:
        raise ValueError(f"`kind` must be one of {GRAPHS}, got {kind!r}")
    is_match = same[rows] & (cols == nearest[rows])
    rows, cols, vals = rows[~is_match], cols[~is_match], vals[~is_match]
    if include_self:
        rows = np.concatenate([rows, np.flatnonzero(same)])
        cols = np.concatenate([cols, nearest[same]])
        vals = np.concatenate([vals, np.zeros(int(same.sum()))])
    lonely = np.setdiff1d(np.arange(m), rows)
    if lonely.size:
        # a lonely point that coincides with a training point skips that match here too
        want = min(fallback_neighbors, n - 1)
        dist, ind = index.kneighbors(X[lonely], n_neighbors=want + 1, return_distance=True)
        skip = same[lonely] & (ind[:, 0] == nearest[lonely])
        take = np.where(skip[:, None], np.arange(1, want + 1), np.arange(want))
        dist = np.take_along_axis(dist, take, axis=1)
        ind = np.take_along_axis(ind, take, axis=1)
        rows = np.concatenate([rows, np.repeat(lonely, want)])
        cols = np.concatenate([cols, ind.ravel()])
        vals = np.concatenate([vals, dist.ravel()])
    order = np.lexsort((cols, rows))
    rows, cols, vals = rows[order], cols[order], vals[order]
    indptr = np.concatenate([[0], np.cumsum(np.bincount(rows, minlength=m))])
    return scipy.sparse.csr_matrix((vals, cols, indptr), shape=(m, n))


# ---------------------------------------------------------------------------------------
# shared by the graph methods: defaults for small data and the Nyström averages

# Neighbours when `n_neighbors` is None, capped at n_samples - 1 for small data.
DEFAULT_NEIGHBORS = 10


def default_neighbors(n_neighbors: int | None, n_samples: int) -> int:
    """The number of neighbours used: the parameter, or min(10, n_samples - 1) for None."""
    return min(DEFAULT_NEIGHBORS, n_samples - 1) if n_neighbors is None else int(n_neighbors)


def local_rule_for(bandwidth: float | str, n_samples: int) -> float | str:
    """``"local"`` means ``local:7``, or ``local:(n_samples - 1)`` with fewer than 8 points."""
    if isinstance(bandwidth, str) and bandwidth.lower() == "local":
        return f"local:{min(DEFAULT_LOCAL_K, n_samples - 1)}"
    return bandwidth


def log_weights(
    sq_dist: np.ndarray,
    bw: Bandwidth,
    cols: np.ndarray,
    row_scales: np.ndarray | None,
) -> np.ndarray:
    """Logarithm of the RBF weights of the edges ending in training points ``cols``."""
    if bw.local is None:
        return sq_dist * (-0.5 / bw.sigma**2)
    return -sq_dist / (2.0 * row_scales * bw.local[cols])


def row_average(
    D: scipy.sparse.csr_matrix, logw: np.ndarray, values: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Weighted row averages of ``values`` over the edges of ``D``, and each row's weight sum.

    The average subtracts each row's largest log-weight first, so it stays finite when every
    weight of a far-away point underflows; the weight sum is the plain one (it may be 0).
    """
    rows = edge_rows(D)
    m = D.shape[0]
    top = np.full(m, -np.inf)
    np.maximum.at(top, rows, logw)
    relative = np.exp(logw - top[rows])
    R = scipy.sparse.csr_matrix((relative, D.indices, D.indptr), shape=D.shape)
    average = (R @ values) / np.asarray(R.sum(axis=1))
    total = np.bincount(rows, weights=np.exp(logw), minlength=m)
    return average, total
