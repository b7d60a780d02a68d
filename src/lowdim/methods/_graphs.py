"""Neighbour graphs, their connected components and their Laplacians, all sparse.

The graph methods build on three steps kept here: a directed distance graph from
``sklearn.neighbors.NearestNeighbors`` (k nearest neighbours or a radius, self excluded),
edge weights computed on its stored entries, and a symmetrisation (union for a kNN graph,
intersection for a mutual kNN graph). Nothing here forms an n x n dense matrix.

A disconnected graph is never embedded silently: :func:`disconnected_policy` warns with the
number of components and their sizes, raises, or keeps the largest component.
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np
import scipy.sparse
import scipy.sparse.csgraph
from sklearn.neighbors import NearestNeighbors

from lowdim.errors import InputError

__all__ = [
    "GRAPHS",
    "NORMALIZATIONS",
    "ON_DISCONNECTED",
    "DisconnectedGraphWarning",
    "DistanceGraph",
    "knn_distance_graph",
    "epsilon_distance_graph",
    "edge_rows",
    "symmetrize",
    "components",
    "disconnected_policy",
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


def knn_distance_graph(X: np.ndarray, n_neighbors: int) -> DistanceGraph:
    """Return the directed k-nearest-neighbour distance graph of the rows of ``X``.

    A kd-tree or ball tree is chosen by scikit-learn for the data; the query excludes each
    point from its own list.
    """
    n = X.shape[0]
    index = NearestNeighbors(n_neighbors=n_neighbors).fit(X)
    dist, ind = index.kneighbors(return_distance=True)
    indptr = np.arange(0, n * n_neighbors + 1, n_neighbors)
    graph = scipy.sparse.csr_matrix((dist.ravel(), ind.ravel(), indptr), shape=(n, n))
    return DistanceGraph(graph, index, dist[:, -1].copy())


def epsilon_distance_graph(X: np.ndarray, radius: float) -> DistanceGraph:
    """Return the distance graph joining every pair of rows closer than ``radius``."""
    n = X.shape[0]
    index = NearestNeighbors(radius=radius).fit(X)
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
    W: scipy.sparse.spmatrix, policy: str, owner: str, *, hint: str = ""
) -> tuple[int, np.ndarray | None]:
    """Apply the policy for a disconnected graph; return the count and the points to keep.

    Returns ``(n_components, keep)`` where ``keep`` is None when every point is kept and
    otherwise the sorted indices of the largest component (the lowest component label wins a
    tie in size). ``"warn"`` keeps every point and warns, ``"raise"`` raises an InputError,
    ``"largest"`` warns and returns the largest component. ``hint`` says how to connect it.
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
            stacklevel=3,
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
            stacklevel=3,
        )
        return count, keep
    raise ValueError(f"`policy` must be one of {ON_DISCONNECTED}, got {policy!r}")


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
