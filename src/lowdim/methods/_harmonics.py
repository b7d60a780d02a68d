"""Repeated eigendirections: which eigenvectors are functions of the earlier ones.

On a long thin domain the leading eigenvectors of a graph Laplacian, a Markov kernel or a
centred kernel matrix are harmonics of one direction (cos(pi x / L), cos(2 pi x / L), ...), so
the first two coordinates draw a curve and the second intrinsic direction appears later.
Dsilva, Talmon, Coifman & Kevrekidis (2018) test each eigenvector phi_k against the earlier
ones: fit phi_k(i) by a function of (phi_1(i), ..., phi_{k-1}(i)) that is linear near each
point, leaving the point out, and keep the normalised residual

    r_k = sqrt(sum_i (phi_k(i) - fit_i)^2 / sum_i phi_k(i)^2),

near 0 for a harmonic (phi_k is a function of the earlier ones) and near 1 for a new
direction; r_1 = 1 by convention. The graph methods and kernel PCA keep these residuals in
``eigen_residuals_`` and, with ``coordinates="independent"``, embed with the eigenvectors of
largest residual.

What is computed here, and how it departs from the paper:

- Each eigenvector is centred and scaled to unit root mean square first, so the earlier
  eigenvectors count alike in the distances and a constant offset does not enter the
  denominator (the paper's eigenvectors are orthogonal to the constant, so this is its r_k).
- The local fit at point i is weighted by exp(-|Phi(j) - Phi(i)|^2 / eps^2) in the space of
  the earlier eigenvectors, eps = 1/3 of the median pairwise distance there (the paper's
  choice), over the ``n_neighbors`` nearest points j != i only, so that no n x n matrix is
  formed (on the strip, swiss roll and S-curve of the tests, 100, 200 and 400 neighbours
  give residuals within about 0.05 of each other).
- A small ridge penalty on the slopes (``ridge`` times the weight sum, with slopes measured
  per eps): the earlier eigenvectors of a finite sample are functions of one direction only up
  to the solver's sampling noise, so near each point they spread thinly across the other
  directions, and an unpenalised local linear fit reads that thin spread as a dependence (on
  the quick suite's swiss roll it scores the fourth eigenvector, the height, 0.07 instead of
  about 0.9). The penalty leaves slopes along directions the neighbourhood really spans
  almost untouched.
- Above ``exact_threshold`` points, everything is computed on ``sample_size`` random points
  (queries and regression points alike), so the cost does not grow with n and the window
  keeps its meaning (a fixed share of the points, as on small data).

References
----------
.. [1] C. J. Dsilva, R. Talmon, R. R. Coifman and I. G. Kevrekidis, "Parsimonious
   representation of nonlinear dynamical systems through manifold learning: a chemotaxis case
   study", Applied and Computational Harmonic Analysis 44 (2018), 759-773.
   https://doi.org/10.1016/j.acha.2015.06.008
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree
from scipy.spatial.distance import pdist
from sklearn.utils import check_random_state

__all__ = [
    "COORDINATES",
    "EXAMINED_PER_COMPONENT",
    "examined_count",
    "local_regression_residuals",
    "choose_coordinates",
    "independent_columns",
]

COORDINATES = ("leading", "independent")
# With coordinates="independent", this many eigenvectors per kept coordinate are examined.
EXAMINED_PER_COMPONENT = 4
# The paper's kernel scale: this fraction of the median pairwise distance.
SCALE_FRACTION = 1.0 / 3.0
# The penalty on the local slopes and the neighbours of each fit (see the module notes):
# with them the strip's and swiss roll's new directions score 0.9 to 1 and their harmonics
# 0.05 to 0.25.
RIDGE = 0.1
N_NEIGHBORS = 100
# Every point up to this many; above, this many random points, so the cost stops growing
# (measured, one thread: 0.05 s for two eigenvectors, 0.1 s for three, 0.7 s for eight).
EXACT_THRESHOLD = 2000
SAMPLE_SIZE = 2000
# Pairs for the median distance: all pairs among this many points.
_MEDIAN_POINTS = 1000
# Elements of one block of local designs (float64: 16 MB).
_BLOCK_ELEMENTS = 1 << 21


def examined_count(coordinates: str, n_components: int, available: int) -> int:
    """How many non-trivial eigenvectors a method computes and tests.

    ``n_components`` for ``"leading"``; for ``"independent"``,
    ``min(EXAMINED_PER_COMPONENT * n_components, available)`` where ``available`` is what the
    solver can give (for example n - 1 non-constant eigenvectors of an n-point graph).
    """
    if coordinates == "leading":
        return n_components
    return max(n_components, min(EXAMINED_PER_COMPONENT * n_components, available))


def _standardised(vectors: np.ndarray) -> np.ndarray:
    V = vectors - vectors.mean(axis=0)
    rms = np.sqrt(np.mean(V * V, axis=0))
    return np.divide(V, rms, out=np.zeros_like(V), where=rms > 0)


def _scale(P: np.ndarray, rng: np.random.RandomState) -> float:
    n = P.shape[0]
    points = P if n <= _MEDIAN_POINTS else P[rng.choice(n, _MEDIAN_POINTS, replace=False)]
    distances = pdist(points)
    median = float(np.median(distances)) if distances.size else 0.0
    if median <= 0.0:  # over half the pairs coincide: fall back on the largest distance
        median = float(np.max(distances, initial=0.0))
    return SCALE_FRACTION * median if median > 0.0 else 1.0


def _others(P: np.ndarray, n_neighbors: int) -> np.ndarray:
    """Each row's ``n_neighbors`` nearest other rows (the row itself left out)."""
    n = P.shape[0]
    _, ind = cKDTree(P).query(P, k=n_neighbors + 1)
    rows = np.arange(n)
    is_self = ind == rows[:, None]
    # Among duplicates the row itself may be missing from the list: then the farthest goes.
    drop = np.where(is_self.any(axis=1), is_self.argmax(axis=1), n_neighbors)
    keep = np.ones(ind.shape, dtype=bool)
    keep[rows, drop] = False
    return ind[keep].reshape(n, n_neighbors)


def _loo_fit(P: np.ndarray, y: np.ndarray, n_neighbors: int, eps: float, ridge: float):
    """Leave-one-out local linear fits of ``y`` on ``P`` at every row, Gaussian-weighted."""
    n, k = P.shape
    ind = _others(P, n_neighbors)
    fit = np.empty(n)
    diagonal = np.arange(1, k + 1)
    step = max(1, _BLOCK_ELEMENTS // (n_neighbors * (k + 1)))
    for start in range(0, n, step):
        rows = slice(start, start + step)
        near = ind[rows]
        D = (P[near] - P[rows, None, :]) / eps
        sq = np.einsum("qjd,qjd->qj", D, D)
        # Weights relative to the nearest neighbour: the same fit, and never all zero.
        w = np.exp(-(sq - sq.min(axis=1, keepdims=True)))
        A = np.concatenate([np.ones(sq.shape + (1,)), D], axis=2)
        At_w = (A * w[:, :, None]).transpose(0, 2, 1)
        G = np.matmul(At_w, A)
        G[:, diagonal, diagonal] += max(ridge, 1e-12) * w.sum(axis=1)[:, None]
        b = np.matmul(At_w, y[near][:, :, None])
        fit[rows] = np.linalg.solve(G, b)[:, 0, 0]
    return fit


def local_regression_residuals(
    vectors: np.ndarray,
    *,
    random_state=None,
    n_neighbors: int = N_NEIGHBORS,
    ridge: float = RIDGE,
    exact_threshold: int = EXACT_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
) -> np.ndarray:
    """Dsilva et al.'s residual r_k of each eigenvector against the earlier ones.

    Parameters
    ----------
    vectors : ndarray of shape (n, m)
        Non-trivial eigenvectors as columns, in eigenvalue order (the constant one left out);
        any scaling per column.
    random_state : int, RandomState or None
        Seeds the sampled points above ``exact_threshold`` and the pairs of the median.
    n_neighbors : int, default=100
        Points in each local fit (capped at the number of points less one).
    ridge : float, default=0.1
        Penalty on the local slopes, relative to the neighbourhood's weight (see the module
        notes); 0 is the paper's unpenalised fit (a 1e-12 floor keeps each local system
        solvable).
    exact_threshold, sample_size : int, default=2000
        Up to ``exact_threshold`` points every point is used; above, ``sample_size`` random
        points.

    Returns
    -------
    ndarray of shape (m,)
        r_1 = 1, then r_2 .. r_m: near 0 for a function of the earlier eigenvectors, near 1
        for a new direction (slightly above 1 is possible for the leave-one-out fit of noise).
        A column with no variance gets 0 (nothing new).
    """
    n, m = vectors.shape
    out = np.ones(m)
    if m < 2 or n < 3:
        return out
    rng = check_random_state(random_state)
    V = np.asarray(vectors, dtype=np.float64)
    if n > exact_threshold:
        V = V[np.sort(rng.choice(n, size=sample_size, replace=False))]
    V = _standardised(V)
    neighbours = min(n_neighbors, V.shape[0] - 1)
    for k in range(1, m):
        y = V[:, k]
        if not np.any(y):
            out[k] = 0.0
            continue
        P = np.ascontiguousarray(V[:, :k])
        fit = _loo_fit(P, y, neighbours, _scale(P, rng), ridge)
        out[k] = float(np.sqrt(np.sum((y - fit) ** 2) / np.sum(y * y)))
    return out


def choose_coordinates(
    vectors: np.ndarray,
    coordinates: str,
    n_components: int,
    *,
    usable: np.ndarray | None = None,
    random_state=None,
) -> tuple[np.ndarray, np.ndarray]:
    """The examined eigenvectors' residuals and the columns to embed with.

    Parameters
    ----------
    vectors : ndarray of shape (n, m)
        The examined non-trivial eigenvectors in eigenvalue order (m = n_components for
        ``"leading"``).
    coordinates : {"leading", "independent"}
    n_components : int
    usable : ndarray of bool of shape (m,), optional
        Eigenvectors that may be chosen (for example those of a positive eigenvalue); the
        leading ones are used when fewer than ``n_components`` are usable.
    random_state : int, RandomState or None

    Returns
    -------
    indices : ndarray of int of shape (n_components,)
        Columns of ``vectors`` to keep, ascending.
    residuals : ndarray of shape (m,)
        :func:`local_regression_residuals` of ``vectors``.
    """
    residuals = local_regression_residuals(vectors, random_state=random_state)
    leading = np.arange(n_components)
    if coordinates == "leading":
        return leading, residuals
    allowed = np.ones(residuals.size, dtype=bool) if usable is None else np.asarray(usable)
    if np.count_nonzero(allowed) < n_components or not allowed[0]:
        return leading, residuals
    candidates = np.flatnonzero(allowed)
    return candidates[independent_columns(residuals[candidates], n_components)], residuals


def independent_columns(residuals: np.ndarray, n_components: int) -> np.ndarray:
    """Indices of the ``n_components`` eigenvectors to keep, in eigenvalue order.

    The first eigenvector is always kept (r_1 = 1 by convention; a leave-one-out residual
    slightly above 1 elsewhere does not displace it); the others are those of largest
    residual, ties to the earlier eigenvector.
    """
    residuals = np.asarray(residuals, dtype=np.float64)
    ranking = residuals.copy()
    ranking[0] = np.inf
    order = np.lexsort((np.arange(ranking.size), -ranking))
    return np.sort(order[:n_components])
