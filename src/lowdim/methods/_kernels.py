"""Kernel functions and the bandwidth rules every kernel method shares.

Kernels take two blocks of points ``X`` (rows) and ``Y`` (columns), so callers can build a
kernel matrix block by block, or only its Nyström columns, without an n x n array. The RBF
kernel is written with the scale sigma: k(x, y) = exp(-|x - y|^2 / (2 sigma^2)), that is
gamma = 1 / (2 sigma^2) in scikit-learn's terms and epsilon = 2 sigma^2 in Coifman & Lafon's
exp(-d^2 / epsilon).

Bandwidth rules (:func:`resolve_bandwidth`):

- a positive number: sigma itself;
- ``"median"``: the median pairwise distance (common practice), exact up to
  :data:`MEDIAN_EXACT_LIMIT` points and on a random sample of pairs above;
- ``"local"`` / ``"local:K"``: per-point scales sigma_i = distance from i to its K-th
  neighbour and the kernel exp(-d_ij^2 / (2 sigma_i sigma_j)) (Zelnik-Manor & Perona 2004;
  K = 7 by default);
- ``"kernel_sum"``: the log-log kernel-sum criterion (Singer 2006; Coifman, Shkolnisky,
  Sigworth & Singer 2008).

References
----------
.. [1] L. Zelnik-Manor and P. Perona, "Self-tuning spectral clustering", Advances in Neural
   Information Processing Systems 17 (NIPS 2004), 1601-1608.
.. [2] A. Singer, "From graph to manifold Laplacian: the convergence rate", Applied and
   Computational Harmonic Analysis 21 (2006), 128-134. https://doi.org/10.1016/j.acha.2006.03.004
.. [3] R. R. Coifman, Y. Shkolnisky, F. J. Sigworth and A. Singer, "Graph Laplacian
   tomography from unknown random projections", IEEE Transactions on Image Processing 17
   (2008), 1891-1899. https://doi.org/10.1109/TIP.2008.2002305
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import scipy.sparse
from scipy.spatial.distance import cdist, pdist
from sklearn.utils import check_random_state

from lowdim._validation import Interval, Options, Pattern, check_param
from lowdim.errors import InputError

__all__ = [
    "BANDWIDTH_SPECS",
    "KERNELS",
    "Bandwidth",
    "resolve_bandwidth",
    "rbf_from_distances",
    "laplacian_from_distances",
    "underflow_error",
    "query_local_scales",
    "squared_distances",
    "manhattan_distances",
    "linear_kernel",
    "rbf_kernel",
    "polynomial_kernel",
    "laplacian_kernel",
    "cosine_kernel",
    "DEFAULT_LOCAL_K",
    "MEDIAN_EXACT_LIMIT",
]

BANDWIDTH_SPECS = [
    Interval(float, 0, None, closed="neither"),
    Options(("median", "local", "kernel_sum")),
    Pattern(r"local:[1-9][0-9]*", "'local:K' with K an int >= 1"),
]

KERNELS = ("linear", "rbf", "polynomial", "laplacian", "cosine")

# Zelnik-Manor & Perona (2004) use the 7th neighbour.
DEFAULT_LOCAL_K = 7
# Exact median below this many points (n(n-1)/2 ~ 2e6 distances); a sample of points above.
MEDIAN_EXACT_LIMIT = 2000
# Rows of the kernel-sum criterion: all rows up to this n, a random sample of rows above.
KERNEL_SUM_EXACT_LIMIT = 2000
KERNEL_SUM_SAMPLE_ROWS = 300
_BLOCK_ENTRIES = 2_000_000


@dataclass(frozen=True, eq=False)
class Bandwidth:
    """A resolved bandwidth.

    Attributes
    ----------
    sigma : float
        The global scale; for a local rule, the median of the per-point scales.
    local : ndarray of shape (n_samples,) or None
        Per-point scales sigma_i for the ``local`` rules, else None.
    rule : str
        ``"value"`` for a number, else the rule with its K (``"median"``, ``"local:7"``,
        ``"kernel_sum"``); ``"gamma"`` when an estimator's ``gamma`` parameter set the scale.
    dimension : float or None
        For ``kernel_sum``: the intrinsic dimension estimated as 2 x the largest log-log slope.
    metric : str
        The distance the scales were measured in (``"euclidean"`` or ``"manhattan"``).
    gamma_value : float or None
        The ``gamma`` parameter the scale came from (rule ``"gamma"``), for messages.
    """

    sigma: float
    local: np.ndarray | None = None
    rule: str = "value"
    dimension: float | None = None
    metric: str = "euclidean"
    gamma_value: float | None = None

    @property
    def gamma(self) -> float:
        """scikit-learn's RBF gamma for the global scale, 1 / (2 sigma^2)."""
        return 1.0 / (2.0 * self.sigma**2)

    @property
    def local_k(self) -> int | None:
        """K of a ``local:K`` rule, else None."""
        if self.local is None:
            return None
        return int(self.rule.split(":")[1])


# ---------------------------------------------------------------------------------------
# distances and kernels on blocks


def squared_distances(
    X: np.ndarray, Y: np.ndarray | None = None, *, X_sq: np.ndarray | None = None
) -> np.ndarray:
    """Squared Euclidean distances between the rows of ``X`` and ``Y`` (``X`` if None).

    Uses |x|^2 + |y|^2 - 2 x.y, clipped at 0 against rounding; with ``Y`` None the diagonal
    is exactly 0. ``X_sq`` may pass precomputed squared row norms of ``X``.
    """
    same = Y is None
    Y = X if same else Y
    xx = np.einsum("ij,ij->i", X, X) if X_sq is None else X_sq
    yy = xx if same else np.einsum("ij,ij->i", Y, Y)
    D = X @ Y.T
    D *= -2.0
    D += xx[:, None]
    D += yy[None, :]
    np.maximum(D, 0.0, out=D)
    if same:
        np.fill_diagonal(D, 0.0)
    return D


def manhattan_distances(X: np.ndarray, Y: np.ndarray | None = None) -> np.ndarray:
    """L1 (city-block) distances between the rows of ``X`` and ``Y`` (``X`` if None)."""
    return cdist(X, X if Y is None else Y, metric="cityblock")


def linear_kernel(X: np.ndarray, Y: np.ndarray | None = None) -> np.ndarray:
    """k(x, y) = x . y."""
    return X @ (X if Y is None else Y).T


def rbf_kernel(X: np.ndarray, Y: np.ndarray | None = None, *, gamma: float) -> np.ndarray:
    """k(x, y) = exp(-gamma |x - y|^2).

    The exponent 2 gamma x.y - gamma |x|^2 - gamma |y|^2 is built in one product and three
    in-place passes (clipped at 0 against rounding; the diagonal of ``Y = None`` exactly 0).
    """
    same = Y is None
    Y = X if same else Y
    xx = np.einsum("ij,ij->i", X, X) * gamma
    yy = xx if same else np.einsum("ij,ij->i", Y, Y) * gamma
    K = (X * (2.0 * gamma)) @ Y.T
    K -= xx[:, None]
    K -= yy[None, :]
    np.minimum(K, 0.0, out=K)
    if same:
        np.fill_diagonal(K, 0.0)
    return np.exp(K, out=K)


def rbf_kernel_upper(X: np.ndarray, *, gamma: float, block_rows: int = 128) -> np.ndarray:
    """The upper triangle (diagonal included) of the RBF kernel of ``X`` with itself.

    Row block by row block, only the entries ``K[i, j]`` with ``j >= i`` are computed: half
    the exponentials of :func:`rbf_kernel`, which dominate its cost. The strict lower
    triangle is left 0. For solvers that read one triangle of a symmetric matrix (BLAS
    ``dsymv``).
    """
    n = X.shape[0]
    K = np.zeros((n, n))
    sq = np.einsum("ij,ij->i", X, X) * gamma
    scaled = X * (2.0 * gamma)
    for start in range(0, n, block_rows):
        stop = min(start + block_rows, n)
        part = scaled[start:stop] @ X[start:].T
        part -= sq[start:stop, None]
        part -= sq[None, start:]
        np.minimum(part, 0.0, out=part)
        part[np.arange(stop - start), np.arange(stop - start)] = 0.0
        np.exp(part, out=part)
        part[np.tril_indices(stop - start, k=-1)] = 0.0
        K[start:stop, start:] = part
    return K


def polynomial_kernel(
    X: np.ndarray,
    Y: np.ndarray | None = None,
    *,
    gamma: float,
    degree: int = 3,
    coef0: float = 1.0,
) -> np.ndarray:
    """k(x, y) = (gamma x . y + coef0) ** degree."""
    K = linear_kernel(X, Y)
    K *= gamma
    K += coef0
    return K**degree


def laplacian_kernel(X: np.ndarray, Y: np.ndarray | None = None, *, gamma: float) -> np.ndarray:
    """k(x, y) = exp(-gamma |x - y|_1) (the L1 distance, as scikit-learn defines it)."""
    K = manhattan_distances(X, Y)
    K *= -gamma
    return np.exp(K, out=K)


def _unit_rows(X: np.ndarray) -> np.ndarray:
    norms = np.sqrt(np.einsum("ij,ij->i", X, X))
    norms[norms == 0.0] = 1.0  # a zero vector stays zero: its cosine with anything is 0
    return X / norms[:, None]


def cosine_kernel(X: np.ndarray, Y: np.ndarray | None = None) -> np.ndarray:
    """k(x, y) = x . y / (|x| |y|), with 0 for a zero vector."""
    Xn = _unit_rows(X)
    return Xn @ (Xn if Y is None else _unit_rows(Y)).T


# ---------------------------------------------------------------------------------------
# bandwidth rules


def _distances_for(X: np.ndarray, metric: str) -> np.ndarray:
    return pdist(X, metric="cityblock" if metric == "manhattan" else "euclidean")


def _median_distance(X: np.ndarray, rng: np.random.RandomState, metric: str) -> float:
    n = X.shape[0]
    if n > MEDIAN_EXACT_LIMIT:
        X = X[rng.choice(n, MEDIAN_EXACT_LIMIT, replace=False)]
    return float(np.median(_distances_for(X, metric)))


def _knn_distances(X: np.ndarray, k: int, metric: str) -> np.ndarray:
    from sklearn.neighbors import NearestNeighbors

    nn = NearestNeighbors(n_neighbors=k, metric=metric).fit(X)
    distances, _ = nn.kneighbors()  # no query: each point's own entry is left out
    return distances


def _kernel_sum(X: np.ndarray, rng: np.random.RandomState) -> tuple[float, float]:
    """Return (eps, slope) at the steepest point of log L(eps) against log eps.

    L(eps) = sum_ij exp(-d_ij^2 / eps). Squared distances from the rows (all, or a random
    sample for large n) to every point are gathered block by block into a histogram on a fine
    logarithmic grid, so L is evaluated for every eps from the histogram alone.
    """
    n = X.shape[0]
    rows = np.arange(n)
    if n > KERNEL_SUM_EXACT_LIMIT:
        rows = np.sort(rng.choice(n, KERNEL_SUM_SAMPLE_ROWS, replace=False))
    probe = X[rng.choice(n, min(n, 200), replace=False)]
    scale = float(np.median(pdist(probe, "sqeuclidean")))
    if not scale > 0.0:
        scale = float(np.max(squared_distances(X[rows[:200]], X))) or 1.0
    # 100 bins per decade over 1e-14 .. 1e6 times the typical squared distance
    lo, per_decade, n_bins = -14.0, 100, 2000
    counts = np.zeros(n_bins, dtype=np.int64)
    n_zero = 0
    xx = np.einsum("ij,ij->i", X, X)
    step = max(1, _BLOCK_ENTRIES // n)
    for start in range(0, len(rows), step):
        block = rows[start : start + step]
        D = squared_distances(X[block], X, X_sq=xx[block])
        D[np.arange(len(block)), block] = 0.0
        flat = D.ravel()
        positive = flat[flat > 0.0]
        n_zero += flat.size - positive.size
        index = np.floor((np.log10(positive / scale) - lo) * per_decade).astype(np.int64)
        counts += np.bincount(np.clip(index, 0, n_bins - 1), minlength=n_bins)
    centres = scale * 10.0 ** (lo + (np.arange(n_bins) + 0.5) / per_decade)
    used = np.flatnonzero(counts)
    if used.size == 0:
        raise InputError(
            "the bandwidth rule 'kernel_sum' needs at least two distinct points; all points "
            "given are identical"
        )
    counts, centres = counts[used], centres[used]
    eps = np.geomspace(centres[0] / 10.0, centres[-1] * 10.0, 400)
    L = n_zero + (counts[None, :] * np.exp(-centres[None, :] / eps[:, None])).sum(axis=1)
    slope = np.gradient(np.log(L), np.log(eps))
    best = int(np.argmax(slope))
    return float(eps[best]), float(slope[best])


def _normalise_rule(bandwidth: object) -> str | float:
    if isinstance(bandwidth, str):
        rule = bandwidth.lower()
        return f"local:{DEFAULT_LOCAL_K}" if rule == "local" else rule
    return float(bandwidth)


def resolve_bandwidth(
    bandwidth: float | str,
    X: np.ndarray,
    *,
    random_state=None,
    knn_distances: np.ndarray | None = None,
    owner: str = "the estimator",
    metric: str = "euclidean",
) -> Bandwidth:
    """Turn a ``bandwidth`` parameter (a number or a rule) into a :class:`Bandwidth`.

    Parameters
    ----------
    bandwidth : float or str
        A positive sigma, or ``"median"``, ``"local"``, ``"local:K"``, ``"kernel_sum"``.
    X : ndarray of shape (n_samples, n_features)
        The training points.
    random_state : int, RandomState or None
        Seeds the samples the median and kernel-sum rules take for large n.
    knn_distances : ndarray of shape (n_samples, m), optional
        Sorted distances to each point's m nearest neighbours, the point itself excluded; a
        ``local:K`` rule with K <= m reads its scales from column K - 1 instead of searching.
    owner : str
        The estimator's name, for error messages.
    metric : {"euclidean", "manhattan"}
        The distance the scales are measured in (``"manhattan"`` for the Laplacian kernel;
        ``kernel_sum`` is defined for Euclidean distances only).

    Returns
    -------
    Bandwidth
    """
    check_param(owner, "bandwidth", bandwidth, BANDWIDTH_SPECS, {})
    rule = _normalise_rule(bandwidth)
    n = X.shape[0]
    rng = check_random_state(random_state)
    if isinstance(rule, float):
        return Bandwidth(sigma=rule, rule="value", metric=metric)
    if rule == "median":
        sigma = _median_distance(X, rng, metric)
        if not sigma > 0.0:
            raise InputError(
                f"the parameter `bandwidth` of `{owner}` is 'median', but the median pairwise "
                "distance is 0 (most points are duplicates); remove duplicate points or give "
                "a number"
            )
        return Bandwidth(sigma=sigma, rule="median", metric=metric)
    if rule == "kernel_sum":
        if metric != "euclidean":
            raise InputError(
                f"the parameter `bandwidth` of `{owner}` is 'kernel_sum', which is defined for "
                f"Euclidean distances only, not {metric!r}; use 'median', 'local' or a number"
            )
        eps, slope = _kernel_sum(X, rng)
        return Bandwidth(sigma=float(np.sqrt(eps / 2.0)), rule="kernel_sum", dimension=2.0 * slope)
    k = int(re.fullmatch(r"local:(\d+)", rule).group(1))
    if k > n - 1:
        raise InputError(
            f"the parameter `bandwidth` of `{owner}` must use K in [1, n_samples - 1] = "
            f"[1, {n - 1}] for 'local:K', got {bandwidth!r}; use a smaller K"
        )
    if knn_distances is not None and knn_distances.shape[1] >= k:
        scales = np.asarray(knn_distances[:, k - 1], dtype=np.float64).copy()
    else:
        scales = _knn_distances(X, k, metric)[:, k - 1]
    zero = int(np.sum(scales <= 0.0))
    if zero:
        raise InputError(
            f"the parameter `bandwidth` of `{owner}` is {bandwidth!r}, but {zero} points have "
            f"at least {k} exact duplicates, so their scale is 0; remove duplicate points or "
            "use a larger K"
        )
    return Bandwidth(sigma=float(np.median(scales)), local=scales, rule=rule, metric=metric)


def query_local_scales(X_train: np.ndarray, Y: np.ndarray, bw: Bandwidth) -> np.ndarray:
    """Per-point scales of new points ``Y`` for a ``local:K`` bandwidth fitted on ``X_train``.

    A new point's scale is its distance to its K-th nearest training point; a new point that
    coincides with a training point skips that one match, so a training point passed again
    gets exactly its training scale.
    """
    from sklearn.neighbors import NearestNeighbors

    k = bw.local_k
    if k is None:
        raise ValueError("query_local_scales needs a bandwidth from a 'local:K' rule")
    nn = NearestNeighbors(n_neighbors=min(k + 1, X_train.shape[0]), metric=bw.metric)
    distances, _ = nn.fit(X_train).kneighbors(Y)
    if distances.shape[1] <= k:
        return distances[:, -1].copy()
    coincide = distances[:, 0] == 0.0
    return np.where(coincide, distances[:, k], distances[:, k - 1])


def _value_text(bw: Bandwidth) -> str:
    if bw.rule == "value":
        return f"{bw.sigma!r}"
    return f"{bw.rule!r} (sigma = {bw.sigma:.4g})"


def rbf_from_distances(
    sq_dist,
    bw: Bandwidth,
    rows: np.ndarray | None = None,
    cols: np.ndarray | None = None,
    *,
    row_scales: np.ndarray | None = None,
    check_owner: str | None = None,
    overwrite: bool = False,
):
    """RBF weights exp(-d^2 / (2 sigma^2)), or exp(-d^2 / (2 sigma_i sigma_j)) for local scales.

    Parameters
    ----------
    sq_dist : ndarray (2-D block or 1-D values) or sparse matrix
        Squared distances. A 2-D block pairs row i with column j; a 1-D array (e.g. the
        ``.data`` of a sparse kNN distance matrix) pairs ``rows[t]`` with ``cols[t]``; a sparse
        matrix is converted entry by entry and returned as a CSR matrix of the same pattern.
    bw : Bandwidth
        From :func:`resolve_bandwidth`.
    rows, cols : ndarray of int, optional
        Indices into ``bw.local`` for the rows and the columns (a 2-D block: one per row and
        one per column, default ``arange``; 1-D values: one per value, required for local
        scales).
    row_scales : ndarray, optional
        Scales of the rows when they are new points (see :func:`query_local_scales`); then
        ``rows`` is ignored.
    check_owner : str, optional
        When given, the rows and the columns index the same training points (self pairs are
        those with equal indices), and a bandwidth so small that some point keeps no weight
        on any other point raises an InputError naming this estimator.
    overwrite : bool, default=False
        Compute the weights in the memory of a dense float64 ``sq_dist`` (saves two n x m
        temporaries when the caller has no further use for the distances).

    Returns
    -------
    ndarray or sparse matrix
        The weights, shaped like ``sq_dist``.
    """
    return _scaled_exp(
        sq_dist, bw, rows, cols, row_scales, check_owner, squared=True, overwrite=overwrite
    )


def laplacian_from_distances(
    dist,
    bw: Bandwidth,
    rows: np.ndarray | None = None,
    cols: np.ndarray | None = None,
    *,
    row_scales: np.ndarray | None = None,
    check_owner: str | None = None,
    overwrite: bool = False,
):
    """Laplacian-kernel weights exp(-d / sigma), or exp(-d / sqrt(sigma_i sigma_j)).

    ``dist`` holds plain (not squared) distances, L1 for the Laplacian kernel as scikit-learn
    defines it; the other arguments are those of :func:`rbf_from_distances`.
    """
    return _scaled_exp(
        dist, bw, rows, cols, row_scales, check_owner, squared=False, overwrite=overwrite
    )


def _scaled_exp(values, bw, rows, cols, row_scales, check_owner, *, squared, overwrite=False):
    if scipy.sparse.issparse(values):
        coo = scipy.sparse.coo_matrix(values)
        data = _scaled_exp(
            coo.data, bw, coo.row, coo.col, row_scales, check_owner, squared=squared
        )
        return scipy.sparse.csr_matrix((data, (coo.row, coo.col)), shape=coo.shape)
    in_place = overwrite and isinstance(values, np.ndarray) and values.dtype == np.float64
    values = np.asarray(values, dtype=np.float64)
    dense = values.ndim == 2
    if dense:
        rows = np.arange(values.shape[0]) if rows is None else np.asarray(rows)
        cols = np.arange(values.shape[1]) if cols is None else np.asarray(cols)
    elif rows is None or cols is None:
        if bw.local is not None or check_owner is not None:
            raise ValueError("1-D distances need `rows` and `cols` index arrays")
    if bw.local is None:
        scale = bw.sigma**2 if squared else bw.sigma
    else:
        left = bw.local[rows] if row_scales is None else np.asarray(row_scales)
        right = bw.local[cols]
        scale = np.multiply.outer(left, right) if dense else left * right
        if not squared:
            scale = np.sqrt(scale)
    factor = -2.0 * scale if squared else -scale
    if in_place:
        values /= factor
        weights = np.exp(values, out=values)
    else:
        weights = np.exp(values / factor)
    if check_owner is not None:
        _check_weights(weights, rows, cols, bw, check_owner)
    return weights


def _check_weights(
    weights: np.ndarray, rows: np.ndarray, cols: np.ndarray, bw: Bandwidth, owner: str
) -> None:
    """Raise when a point has no positive weight on any other point."""
    if weights.ndim == 2:
        positive = np.count_nonzero(weights > 0.0, axis=1)
        positive -= np.isin(rows, cols)  # the self pair always weighs exp(0) = 1
        isolated = int(np.sum(positive <= 0))
        total = weights.shape[0]
    else:
        other = (weights > 0.0) & (rows != cols)
        present = np.bincount(rows)
        linked = np.bincount(rows[other], minlength=present.size)
        isolated = int(np.sum((present > 0) & (linked == 0)))
        total = int(np.sum(present > 0))
    if isolated:
        raise underflow_error(bw, owner, isolated, total)


def underflow_error(bw: Bandwidth, owner: str, isolated: int, total: int) -> InputError:
    """The error for a kernel that leaves ``isolated`` of ``total`` points without weight."""
    if bw.rule == "gamma":
        return InputError(
            f"the parameter `gamma` of `{owner}` is too large for this data: with gamma = "
            f"{bw.gamma_value!r} the kernel underflows to 0 and leaves {isolated} of {total} "
            "points with no weight on any other point; use a smaller gamma, or leave gamma "
            "None and set bandwidth to a rule such as 'median'"
        )
    return InputError(
        f"the parameter `bandwidth` of `{owner}` is too small for this data: with "
        f"bandwidth {_value_text(bw)} the kernel underflows to 0 and leaves {isolated} of "
        f"{total} points with no weight on any other point; use a larger value or a rule "
        "such as 'median'"
    )
