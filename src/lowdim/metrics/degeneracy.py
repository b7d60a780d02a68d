"""Degenerate embeddings named, with the numbers that show them.

A low score says an embedding is poor; these checks say how. Each returns a list of
:class:`Degeneracy` records (kind, the coordinate or component concerned, the number, the
limit it crossed, one sentence), empty for a healthy embedding:

- ``harmonic``: a coordinate that is mostly a function of the earlier ones, from a method's
  ``eigen_residuals_`` (Dsilva, Talmon, Coifman & Kevrekidis 2018): residual below
  ``HARMONIC_THRESHOLD`` = 0.5, i.e. over 75 % of its variance predicted by the earlier
  eigenvectors. The embedding draws a curve where the data may have a second direction.
- ``collapsed_component``: with a disconnected neighbour graph the leading eigenvectors are
  constant on components, so a whole component lands on a point or a segment: a component
  whose spread (or whose spread across its main axis) is below ``COLLAPSE_TOLERANCE`` = 1e-3
  of the embedding's. Without the components, clusters of ``min_size`` or more near-identical
  rows of the embedding (within that tolerance) are reported instead.
- ``flat_coordinate``: a coordinate carrying less than ``FLAT_SHARE`` = 1e-4 of the total
  variance (its spread under 1 % of the embedding's): it draws as a line.
- ``concentrated_variance``: over ``CONCENTRATION_THRESHOLD`` = half of the total variance
  (squared distance from the centroid) carried by the top 1 % of points: a few outliers set
  the scale and the rest sit in a clump (for a Gaussian cloud that share is about 6 %).
- ``kernel_diagonal`` / ``kernel_constant``: an RBF bandwidth at which the kernel
  exp(-d^2 / (2 sigma^2)) is nearly the identity (the median point's weights to its
  ``n_neighbors`` nearest sum to less than ``DIAGONAL_MASS`` = 0.1 of its weight 1 to itself)
  or nearly constant (two points at the median distance weigh more than
  ``CONSTANT_WEIGHT`` = 0.9; the centred kernel is then about 2 gamma Xc Xc^T, so kernel PCA
  is PCA, REFERENCES.md).

The thresholds are this project's choices, measured on the quick suite's data sets (see
DEVELOPERS.md); the records carry the numbers so that a reader can judge.

References
----------
.. [1] C. J. Dsilva, R. Talmon, R. R. Coifman and I. G. Kevrekidis, "Parsimonious
   representation of nonlinear dynamical systems through manifold learning: a chemotaxis case
   study", Applied and Computational Harmonic Analysis 44 (2018), 759-773.
   :doi:`10.1016/j.acha.2015.06.008`
.. [2] U. von Luxburg, "A tutorial on spectral clustering", Statistics and Computing 17
   (2007), 395-416 (the eigenvalue 0 of a disconnected graph and its indicator vectors).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
import scipy.sparse
import scipy.sparse.csgraph
from numpy.typing import ArrayLike
from scipy.spatial.distance import pdist
from sklearn.neighbors import NearestNeighbors, kneighbors_graph

from lowdim._validation import check_data
from lowdim.metrics._neighbors import query_knn

__all__ = [
    "Degeneracy",
    "KINDS",
    "HARMONIC_THRESHOLD",
    "COLLAPSE_TOLERANCE",
    "FLAT_SHARE",
    "CONCENTRATION_THRESHOLD",
    "DIAGONAL_MASS",
    "CONSTANT_WEIGHT",
    "find_degeneracies",
    "harmonic_coordinates",
    "graph_components",
    "collapsed_components",
    "duplicate_clusters",
    "flat_coordinates",
    "concentrated_variance",
    "kernel_extremes",
]

KINDS = (
    "harmonic",
    "collapsed_component",
    "flat_coordinate",
    "concentrated_variance",
    "kernel_diagonal",
    "kernel_constant",
)
HARMONIC_THRESHOLD = 0.5
COLLAPSE_TOLERANCE = 1e-3
FLAT_SHARE = 1e-4
CONCENTRATION_THRESHOLD = 0.5
TOP_SHARE = 0.01
DIAGONAL_MASS = 0.1
CONSTANT_WEIGHT = 0.9
# Pairs for the median distance: all pairs among this many random points (124,750 pairs pin a
# median to well under 1 %); and query points for the median point's off-diagonal mass.
_MEDIAN_POINTS = 500
_MASS_POINTS = 256
# Rows searched for near-identical groups (see duplicate_clusters).
DUPLICATE_SAMPLE = 2000


@dataclass(frozen=True)
class Degeneracy:
    """One way an embedding degenerates, with its evidence.

    Attributes
    ----------
    kind : str
        One of ``KINDS``.
    value : float
        The number the finding rests on (a residual, a spread ratio, a variance share, a
        kernel weight, or a count of components).
    threshold : float
        The limit ``value`` crossed.
    explanation : str
        One sentence for a reader.
    coordinate : int or None
        The coordinate concerned, 1-based.
    component : int or None
        The component concerned (0-based label among the graph's components, or the cluster's
        number), for ``collapsed_component``.
    size : int or None
        Points concerned, where it means something (a component, a cluster, the top share).
    """

    kind: str
    value: float
    threshold: float
    explanation: str
    coordinate: int | None = None
    component: int | None = None
    size: int | None = None

    def as_dict(self) -> dict[str, Any]:
        """The record as a plain dict (for JSON or a table)."""
        return asdict(self)


def _embedding(Y: ArrayLike) -> np.ndarray:
    return check_data(Y, "find_degeneracies", min_samples=2, name="Y")


def _spread(Y: np.ndarray) -> float:
    """Root mean squared distance of the rows from their centroid."""
    centred = Y - Y.mean(axis=0)
    return float(np.sqrt(np.mean(np.einsum("ij,ij->i", centred, centred))))


def harmonic_coordinates(
    eigen_residuals: ArrayLike,
    eigenvector_indices: ArrayLike | None = None,
    *,
    threshold: float = HARMONIC_THRESHOLD,
) -> list[Degeneracy]:
    """Coordinates whose eigenvector is mostly a function of the earlier eigenvectors.

    ``eigen_residuals`` and ``eigenvector_indices`` are a fitted method's
    ``eigen_residuals_`` and ``eigenvector_indices_`` (the leading ones when None). The first
    coordinate is never a harmonic (its residual is 1 by convention).
    """
    residuals = np.asarray(eigen_residuals, dtype=np.float64).ravel()
    if eigenvector_indices is None:
        indices = np.arange(residuals.size)
    else:
        indices = np.asarray(eigenvector_indices, dtype=int).ravel()
    out = []
    for position, index in enumerate(indices):
        if index == 0 or index >= residuals.size:
            continue
        r = float(residuals[index])
        if r < threshold:
            out.append(
                Degeneracy(
                    "harmonic",
                    r,
                    threshold,
                    f"coordinate {position + 1} is {100 * (1 - r * r):.0f} % predicted by the "
                    f"eigenvectors before it (local regression residual {r:.2f}): it repeats a "
                    "direction already drawn, so the picture is a curve; "
                    "coordinates='independent' looks further down the spectrum",
                    coordinate=position + 1,
                )
            )
    return out


def graph_components(X: ArrayLike, n_neighbors: int) -> tuple[int, np.ndarray]:
    """Components of the symmetrised kNN graph of ``X`` (an edge when either point is among
    the other's ``n_neighbors`` nearest, the graph methods' default) and each row's label."""
    X = check_data(X, "graph_components", min_samples=2, name="X")
    k = min(int(n_neighbors), X.shape[0] - 1)
    graph = kneighbors_graph(X, k, mode="connectivity")
    count, labels = scipy.sparse.csgraph.connected_components(graph, directed=False)
    return int(count), labels


def collapsed_components(
    Y: ArrayLike, component_labels: ArrayLike, *, tolerance: float = COLLAPSE_TOLERANCE
) -> list[Degeneracy]:
    """Components of the graph embedded as a point or a segment.

    A component of two or more points collapses to a point when its spread is below
    ``tolerance`` times the whole embedding's, and to a segment when only its spread across
    its main axis is (for embeddings of two or more dimensions).
    """
    Y = _embedding(Y)
    labels = np.asarray(component_labels).ravel()
    if labels.size != Y.shape[0]:
        raise ValueError(f"`component_labels` has {labels.size} entries for {Y.shape[0]} rows")
    scale = _spread(Y)
    if scale == 0.0:
        return []
    out = []
    for label in np.unique(labels):
        rows = labels == label
        size = int(np.count_nonzero(rows))
        if size < 2:
            continue
        part = Y[rows] - Y[rows].mean(axis=0)
        axes = np.linalg.svd(part, compute_uv=False) / np.sqrt(size) / scale
        if axes[0] < tolerance:
            shape, value = "a point", float(axes[0])
        elif Y.shape[1] > 1 and axes[1] < tolerance:
            shape, value = "a segment", float(axes[1])
        else:
            continue
        out.append(
            Degeneracy(
                "collapsed_component",
                value,
                tolerance,
                f"the {size} points of graph component {int(label)} are drawn as {shape} "
                f"(spread {value:.1e} of the embedding's): the graph is disconnected, so the "
                "leading eigenvectors only tell the components apart; more neighbours or a "
                "wider bandwidth join them",
                component=int(label),
                size=size,
            )
        )
    return out


def duplicate_clusters(
    Y: ArrayLike,
    *,
    tolerance: float = COLLAPSE_TOLERANCE,
    min_size: int | None = None,
    sample_size: int = DUPLICATE_SAMPLE,
    random_state: int | None = 0,
) -> list[Degeneracy]:
    """Clusters of near-identical rows of the embedding, found without the graph.

    Rows within ``tolerance`` times the embedding's spread of each other are joined; a group
    of ``min_size`` (default: the larger of 5 and 1 % of the rows) or more whose extent is
    itself below that is reported.

    Above ``sample_size`` rows the groups are looked for among that many random rows (a group
    of 1 % of the rows then shows about 20 of them; one of half that is taken as a lead), and
    each lead is counted on every row: the rows in its box widened by the tolerance. The pairs
    within the radius are never more than ``sample_size`` squared, whatever the embedding, so
    the check's memory is bounded where a collapse puts every row within the radius of every
    other.
    """
    Y = _embedding(Y)
    n = Y.shape[0]
    min_size = max(5, int(np.ceil(0.01 * n))) if min_size is None else int(min_size)
    scale = _spread(Y)
    if scale == 0.0 or n < min_size:
        return []
    radius = tolerance * scale
    if n > sample_size:
        rows = np.sort(np.random.default_rng(random_state).choice(n, sample_size, replace=False))
        lead_size = max(3, int(np.ceil(0.5 * min_size * sample_size / n)))
    else:
        rows, lead_size = np.arange(n), min_size
    part = Y[rows]
    close = NearestNeighbors(radius=radius).fit(part).radius_neighbors_graph(part)
    count, labels = scipy.sparse.csgraph.connected_components(close, directed=False)
    sizes = np.bincount(labels, minlength=count)
    out = []
    for label in np.flatnonzero(sizes >= lead_size):
        members = part[labels == label]
        if n > sample_size:
            low, high = members.min(axis=0) - radius, members.max(axis=0) + radius
            members = Y[np.all((Y >= low) & (Y <= high), axis=1)]
        size = members.shape[0]
        extent = float(np.max(np.ptp(members, axis=0)) / scale)
        if size < min_size or extent >= tolerance:
            continue  # a chain through a dense region, not points on top of one another
        out.append(
            Degeneracy(
                "collapsed_component",
                extent,
                tolerance,
                f"{size} points are drawn on top of one another (extent {extent:.1e} of the "
                "embedding's spread): a part of the data collapsed to a point, as a "
                "disconnected graph does to a component",
                component=len(out),
                size=size,
            )
        )
    return out


def flat_coordinates(Y: ArrayLike, *, threshold: float = FLAT_SHARE) -> list[Degeneracy]:
    """Coordinates that carry almost none of the embedding's variance."""
    Y = _embedding(Y)
    variances = Y.var(axis=0)
    total = float(variances.sum())
    if Y.shape[1] < 2 or total == 0.0:
        return []
    out = []
    for j, share in enumerate(variances / total):
        if share < threshold:
            out.append(
                Degeneracy(
                    "flat_coordinate",
                    float(share),
                    threshold,
                    f"coordinate {j + 1} carries {share:.1e} of the variance: it draws as a "
                    "line, so the embedding shows fewer dimensions than asked for",
                    coordinate=j + 1,
                )
            )
    return out


def concentrated_variance(
    Y: ArrayLike,
    *,
    top_share: float = TOP_SHARE,
    threshold: float = CONCENTRATION_THRESHOLD,
) -> list[Degeneracy]:
    """An embedding whose variance sits in a few points.

    The share of the total squared distance from the centroid carried by the
    ceil(``top_share`` x n) farthest points; reported above ``threshold``.
    """
    Y = _embedding(Y)
    n = Y.shape[0]
    centred = Y - Y.mean(axis=0)
    squared = np.einsum("ij,ij->i", centred, centred)
    total = float(squared.sum())
    if total == 0.0:
        return []
    top = max(1, int(np.ceil(top_share * n)))
    share = float(np.sort(squared)[n - top :].sum() / total)
    if share <= threshold:
        return []
    return [
        Degeneracy(
            "concentrated_variance",
            share,
            threshold,
            f"the {top} farthest of {n} points carry {100 * share:.0f} % of the embedding's "
            "variance: they set its scale and the other points sit in a clump",
            size=top,
        )
    ]


def kernel_extremes(
    X: ArrayLike,
    bandwidth: float,
    *,
    local_scales: ArrayLike | None = None,
    n_neighbors: int = 10,
    random_state: int | None = 0,
) -> list[Degeneracy]:
    """An RBF bandwidth at which the kernel is nearly the identity or nearly constant.

    Parameters
    ----------
    X : array-like of shape (n, D)
        The data the kernel was built on.
    bandwidth : float
        sigma of exp(-d^2 / (2 sigma^2)) (a method's ``bandwidth_``).
    local_scales : array-like of shape (n,), optional
        Per-point scales sigma_i of a local rule (kernel exp(-d^2 / (2 sigma_i sigma_j))).
    n_neighbors : int, default=10
        Neighbours whose weights make a point's off-diagonal mass.
    random_state : int or None, default=0
        Seeds the points of the median distance above 2,000 points.
    """
    X = check_data(X, "kernel_extremes", min_samples=2, name="X")
    n = X.shape[0]
    sigma = float(bandwidth)
    if not np.isfinite(sigma) or sigma <= 0.0:
        return []
    scales = None if local_scales is None else np.asarray(local_scales, dtype=np.float64)
    k = min(int(n_neighbors), n - 1)
    rng = np.random.default_rng(random_state)
    # The median point's mass is estimated on a sample of query points (against all points).
    queries = np.arange(n) if n <= _MASS_POINTS else rng.choice(n, _MASS_POINTS, replace=False)
    ind, dist = query_knn(X, queries, k)
    if scales is None:
        weights = np.exp(-(dist**2) / (2.0 * sigma**2))
    else:
        weights = np.exp(-(dist**2) / (2.0 * scales[queries, None] * scales[ind]))
    mass = float(np.median(weights.sum(axis=1)))
    out = []
    if mass < DIAGONAL_MASS:
        out.append(
            Degeneracy(
                "kernel_diagonal",
                mass,
                DIAGONAL_MASS,
                f"at bandwidth {sigma:.3g} the median point's weights to its {k} nearest "
                f"neighbours sum to {mass:.1e} of its weight to itself: the kernel is nearly "
                "the identity and the embedding sees no neighbourhoods; widen the bandwidth",
            )
        )
    sample = X if n <= _MEDIAN_POINTS else X[rng.choice(n, _MEDIAN_POINTS, replace=False)]
    median = float(np.median(pdist(sample)))
    typical = sigma if scales is None else float(np.median(scales))
    weight = float(np.exp(-(median**2) / (2.0 * typical**2)))
    if weight > CONSTANT_WEIGHT:
        out.append(
            Degeneracy(
                "kernel_constant",
                weight,
                CONSTANT_WEIGHT,
                f"at bandwidth {typical:.3g} two points at the median distance {median:.3g} "
                f"weigh {weight:.3f}: the kernel is nearly constant, so it sees only the "
                "data's linear shape (kernel PCA becomes PCA); narrow the bandwidth",
            )
        )
    return out


def _read(fitted: Any, name: str) -> Any:
    if fitted is None:
        return None
    if isinstance(fitted, Mapping):
        return fitted.get(name)
    return getattr(fitted, name, None)


def find_degeneracies(
    Y: ArrayLike,
    *,
    X: ArrayLike | None = None,
    fitted: Any = None,
    n_neighbors: int | None = None,
    random_state: int | None = 0,
) -> list[Degeneracy]:
    """Every check that the given data allows, in the order of ``KINDS``.

    Parameters
    ----------
    Y : array-like of shape (n, d)
        The embedding.
    X : array-like of shape (n, D), optional
        The input; needed for the graph components and the kernel checks.
    fitted : estimator or mapping, optional
        A fitted method, or a dict of what it recorded. Read when present:
        ``eigen_residuals_`` and ``eigenvector_indices_`` (harmonics),
        ``n_connected_components_`` and ``n_neighbors_`` (components), ``bandwidth_`` and
        ``local_bandwidths_`` (kernel checks).
    n_neighbors : int, optional
        The graph's neighbours, when ``fitted`` does not record ``n_neighbors_`` (default 10).
    random_state : int or None, default=0
        Seeds the sampled pairs of the kernel check.

    Returns
    -------
    list of Degeneracy
        Empty for a healthy embedding.
    """
    Y = _embedding(Y)
    found: list[Degeneracy] = []
    residuals = _read(fitted, "eigen_residuals_")
    if residuals is not None:
        found += harmonic_coordinates(residuals, _read(fitted, "eigenvector_indices_"))
    found += _components(Y, X, fitted, n_neighbors, random_state)
    found += flat_coordinates(Y)
    found += concentrated_variance(Y)
    bandwidth = _read(fitted, "bandwidth_")
    # the checks assume the Gaussian kernel (not kernel PCA's L1 "laplacian" one)
    gaussian = str(_read(fitted, "kernel") or "rbf").lower() == "rbf"
    if X is not None and bandwidth is not None and gaussian:
        local = _read(fitted, "local_bandwidths_")
        found += kernel_extremes(X, bandwidth, local_scales=local, random_state=random_state)
    return found


def _components(
    Y: np.ndarray, X, fitted, n_neighbors: int | None, random_state: int | None
) -> list[Degeneracy]:
    count = _read(fitted, "n_connected_components_")
    if count is None or int(count) <= 1:
        return duplicate_clusters(Y, random_state=random_state)
    k = n_neighbors if n_neighbors is not None else _read(fitted, "n_neighbors_") or 10
    if X is not None:
        found, labels = graph_components(X, k)
        if found == int(count):
            return collapsed_components(Y, labels) or duplicate_clusters(
                Y, random_state=random_state
            )
    clusters = duplicate_clusters(Y, random_state=random_state)
    disconnected = Degeneracy(
        "collapsed_component",
        float(count),
        1.0,
        f"the method's neighbour graph has {int(count)} connected components, so its leading "
        "coordinates tell the components apart instead of drawing each; more neighbours or a "
        "wider bandwidth join them",
        size=None,
    )
    return [disconnected, *clusters]
