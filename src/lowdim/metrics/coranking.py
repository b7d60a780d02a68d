"""Co-ranking criteria: Q_NX(K), R_NX(K), LCMC(K) and the area under the R_NX(K) curve.

Q_NX(K) is the mean share of each point's K nearest input neighbours that are also among its
K nearest in the embedding: the upper-left K x K block of the co-ranking matrix divided by
K n. For every K up to the length of the neighbour lists it comes from the lists alone: j
counts for K once both its positions (in the input list and in the embedding list) are at
most K. The area under R_NX needs every K, so full ranks: exact up to a threshold, from
random query rows (against all points) above it.

References
----------
.. [1] J. A. Lee and M. Verleysen, "Quality assessment of dimensionality reduction:
   rank-based criteria", Neurocomputing 72(7-9), pp. 1431-1443, 2009.
   :doi:`10.1016/j.neucom.2008.12.017`
.. [2] J. A. Lee, D. H. Peluffo-Ordonez and M. Verleysen, "Multi-scale similarities in
   stochastic neighbour embedding: reducing dimensionality while preserving both local and
   global structure", Neurocomputing 169, pp. 246-261, 2015.
   :doi:`10.1016/j.neucom.2014.12.095`
.. [3] L. Chen and A. Buja, "Local multidimensional scaling for nonlinear dimension
   reduction, graph drawing, and proximity analysis", JASA 104(485), pp. 209-219, 2009.
   :doi:`10.1198/jasa.2009.0111`
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from lowdim.metrics._checks import check_k, check_pair
from lowdim.metrics._neighbors import (
    FULL_RANK_THRESHOLD,
    SAMPLE_SIZE,
    Estimate,
    Neighbourhoods,
    block_rows,
    for_each_block,
    half_sq_norms,
    ranking_keys,
    sample_rows,
)
from lowdim.metrics._registry import register_metric

__all__ = [
    "qnx",
    "rnx",
    "lcmc",
    "rnx_auc",
    "qnx_from_lists",
    "rnx_from_qnx",
    "lcmc_from_qnx",
    "auc_from_rnx",
    "full_coranking",
    "rnx_grid",
]

LEE_VERLEYSEN = "Lee & Verleysen, Neurocomputing 72, 2009"
# The input's full ranks are kept across embeddings up to this many entries (int32: 64 MB).
MEMO_RANKS = 1 << 24


def qnx_from_lists(nx: np.ndarray, ny: np.ndarray) -> np.ndarray:
    """Q_NX(K) for K = 1 .. k from the k nearest lists of both spaces (``q[K - 1]``)."""
    n, k = nx.shape
    offsets = (np.arange(n, dtype=np.int64) * n)[:, None]
    # Row offsets make row-sorted lists one sorted array of (row, point) keys; sorted
    # needles make the search walk forward through memory.
    order_x = np.argsort(nx, axis=1)
    keys = (np.take_along_axis(nx, order_x, axis=1) + offsets).ravel()
    order_y = np.argsort(ny, axis=1)
    query = (np.take_along_axis(ny, order_y, axis=1) + offsets).ravel()
    pos = np.minimum(np.searchsorted(keys, query), keys.size - 1)
    found = keys[pos] == query
    in_x = order_x.ravel()[pos] + 1
    in_y = order_y.ravel() + 1
    counts = np.bincount(np.maximum(in_x, in_y)[found], minlength=k + 1)[1:]
    return np.cumsum(counts) / (n * np.arange(1, k + 1))


def rnx_from_qnx(q: np.ndarray, n: int, K: np.ndarray) -> np.ndarray:
    """R_NX(K) = ((n - 1) Q_NX(K) - K) / (n - 1 - K): 0 for a random embedding, 1 at best."""
    return ((n - 1) * q - K) / (n - 1 - K)


def lcmc_from_qnx(q: np.ndarray, n: int, K: np.ndarray) -> np.ndarray:
    """LCMC(K) = Q_NX(K) - K / (n - 1) (Chen & Buja 2009)."""
    return q - K / (n - 1)


def auc_from_rnx(r: np.ndarray) -> float:
    """Area under R_NX(K) on a log scale: sum_K R_NX(K) / K / sum_K 1 / K, K = 1 .. n - 2."""
    w = 1.0 / np.arange(1, r.size + 1)
    return float((r * w).sum() / w.sum())


def rnx_grid(k_top: int) -> list[int]:
    """Log-spaced K (1, 2, 3, 4, 6, 8, 11, 16, ...) up to ``k_top``, for R_NX(K) curves."""
    grid = sorted({int(round(2 ** (i / 2))) for i in range(64) if round(2 ** (i / 2)) <= k_top})
    return grid


def _row_ranks(D: np.ndarray) -> np.ndarray:
    # Rank of every column within its row, self (set to -inf) ranked 0, ties to the lower index.
    b, n = D.shape
    perm = np.argsort(D, axis=1)
    # Flat indices: numpy's 1-D take and put are several times faster than *_along_axis.
    flat = perm + (np.arange(b) * n)[:, None]
    ordered = np.take(D, flat)
    tied = np.flatnonzero((ordered[:, 1:] == ordered[:, :-1]).any(axis=1))
    if tied.size:
        perm[tied] = np.argsort(D[tied], axis=1, kind="stable")
        flat[tied] = perm[tied] + (tied * n)[:, None]
    ranks = np.empty(D.shape, dtype=np.int32)
    np.put(ranks, flat, np.broadcast_to(np.arange(n, dtype=np.int32), (b, n)))
    return ranks


def full_coranking(ctx: Neighbourhoods) -> tuple[np.ndarray, np.ndarray]:
    """Q_NX(K) for K = 1 .. n - 1 over the query rows, and each row's area under R_NX.

    Each query row's ranks of all points in both spaces are computed in blocks; the co-ranking
    matrix restricted to those rows is reduced on the fly to the histogram of
    max(rank in X, rank in Y), which is all Q_NX needs.
    """
    if "coranking" in ctx.cache:
        return ctx.cache["coranking"]
    X, Y, n, rows = ctx.X, ctx.Y, ctx.n, ctx.full_rows
    x_half, y_half = half_sq_norms(X), half_sq_norms(Y)
    K = np.arange(1, n - 1)
    w = 1.0 / K
    row_auc = np.empty(rows.size)
    step = block_rows(n, per_row=12)

    # The input's ranks depend on X alone: kept across embeddings when they are small.
    memo = ctx.memo if ctx.memo is not None and rows.size * n <= MEMO_RANKS else None
    kept = None
    if memo is not None:
        kept = memo.setdefault(("full_ranks", rows.tobytes(), step), {})

    def x_ranks(blk: np.ndarray, start: int) -> np.ndarray:
        if kept is not None and start in kept:
            return kept[start]
        D = ranking_keys(X[blk], X, x_half)
        D[np.arange(blk.size), blk] = -np.inf
        ranks = _row_ranks(D)
        if kept is not None:
            ranks.setflags(write=False)
            kept[start] = ranks
        return ranks

    def work(start: int) -> np.ndarray:
        blk = rows[start : start + step]
        b = blk.size
        D = ranking_keys(Y[blk], Y, y_half)
        D[np.arange(b), blk] = -np.inf
        worst = np.maximum(x_ranks(blk, start), _row_ranks(D))
        if not ctx.full_sampled:
            return np.bincount(worst.ravel(), minlength=n)
        # Per-row areas, for the standard error of the sampled estimate.
        hist = np.bincount((worst + (np.arange(b) * n)[:, None]).ravel(), minlength=b * n)
        hist = hist.reshape(b, n)
        q_rows = np.cumsum(hist[:, 1 : n - 1], axis=1) / K
        row_auc[start : start + b] = (rnx_from_qnx(q_rows, n, K) * w).sum(axis=1) / w.sum()
        return hist.sum(axis=0)

    total = np.sum(for_each_block(work, rows.size, step), axis=0)
    q = np.cumsum(total[1:]) / (rows.size * np.arange(1, n))
    ctx.cache["coranking"] = (q, row_auc)
    return q, row_auc


def rnx_auc_estimate(ctx: Neighbourhoods) -> Estimate:
    """The area under R_NX(K), exact or (sampled query rows) with its standard error."""
    q, row_auc = full_coranking(ctx)
    n = ctx.n
    K = np.arange(1, n - 1)
    value = auc_from_rnx(rnx_from_qnx(q[: n - 2], n, K))
    if not ctx.full_sampled:
        return Estimate(value)
    return Estimate(value, ctx.mean_and_error(row_auc, sampled=True).standard_error)


def _q_at(X: ArrayLike, Y: ArrayLike, k: int | None, owner: str, high: int, rule: str):
    X, Y = check_pair(X, Y, owner)
    n = X.shape[0]
    k = check_k(k, n, owner, n - high, rule)
    ctx = Neighbourhoods(X, Y, k_lists=k)
    return qnx_from_lists(ctx.nx, ctx.ny)[k - 1], n, k


@register_metric(
    "qnx",
    higher_is_better=True,
    uses_k=True,
    k_rule="1 <= k <= n - 1",
    k_max=lambda n: n - 1,
    source=LEE_VERLEYSEN,
    description="mean share of each point's K nearest input neighbours that stay among its K "
    "nearest in the embedding",
)
def qnx(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Q_NX(K), the co-ranking matrix's upper-left K x K block over K n (Lee & Verleysen 2009).

    Exact at every n: it needs the K nearest lists only. ``labels`` and ``truth`` are
    ignored.

    References
    ----------
    .. [1] J. A. Lee and M. Verleysen, Neurocomputing 72, pp. 1431-1443, 2009.
    """
    q, _, _ = _q_at(X, Y, k, "qnx", 1, "1 <= k <= n - 1")
    return float(q)


@register_metric(
    "rnx",
    higher_is_better=True,
    uses_k=True,
    k_rule="1 <= k <= n - 2",
    k_max=lambda n: n - 2,
    source=LEE_VERLEYSEN,
    description="Q_NX(K) rescaled so that a random embedding scores 0 and a perfect one 1",
)
def rnx(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """R_NX(K) = ((n - 1) Q_NX(K) - K) / (n - 1 - K) (Lee, Peluffo-Ordonez & Verleysen 2015).

    References
    ----------
    .. [1] J. A. Lee, D. H. Peluffo-Ordonez and M. Verleysen, Neurocomputing 169, 2015.
    """
    q, n, k = _q_at(X, Y, k, "rnx", 2, "1 <= k <= n - 2")
    return float(rnx_from_qnx(q, n, k))


@register_metric(
    "lcmc",
    higher_is_better=True,
    uses_k=True,
    k_rule="1 <= k <= n - 1",
    k_max=lambda n: n - 1,
    source="Chen & Buja, JASA 104, 2009",
    description="Q_NX(K) minus the share K/(n - 1) a random embedding keeps",
)
def lcmc(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Local continuity meta-criterion LCMC(K) = Q_NX(K) - K / (n - 1) (Chen & Buja 2009).

    References
    ----------
    .. [1] L. Chen and A. Buja, JASA 104(485), pp. 209-219, 2009.
    """
    q, n, k = _q_at(X, Y, k, "lcmc", 1, "1 <= k <= n - 1")
    return float(lcmc_from_qnx(q, n, k))


@register_metric(
    "rnx_auc",
    headline=1,
    higher_is_better=True,
    source="Lee, Peluffo-Ordonez & Verleysen, Neurocomputing 169, 2015",
    description="R_NX(K) averaged over K = 1 .. n - 2 with weights 1/K (area under the curve "
    "on a log scale)",
)
def rnx_auc(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    exact_threshold: int = FULL_RANK_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
    random_state: int | None = 0,
) -> float:
    """Area under the R_NX(K) curve with log-K weighting (Lee, Peluffo-Ordonez & Verleysen).

    AUC = sum_K R_NX(K) / K / sum_K 1 / K over K = 1 .. n - 2. Needs full ranks: exact for n
    up to ``exact_threshold`` (default 4000, since each query point costs two sorts of all
    n), estimated from ``sample_size`` random query points (against all points) above it.

    References
    ----------
    .. [1] J. A. Lee, D. H. Peluffo-Ordonez and M. Verleysen, Neurocomputing 169, pp. 246-261,
       2015. :doi:`10.1016/j.neucom.2014.12.095`
    """
    X, Y = check_pair(X, Y, "rnx_auc")
    rows = sample_rows(X.shape[0], exact_threshold, sample_size, random_state)
    return rnx_auc_estimate(Neighbourhoods(X, Y, k_lists=1, full_rows=rows)).value
