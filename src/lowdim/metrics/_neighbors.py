"""Exact neighbour lists and ranks, in row blocks: never an n x n matrix in memory.

Rank convention (REFERENCES.md): r(i, j) is the rank of j among i's neighbours, 1 = nearest,
i itself excluded, ties broken by the lower index. Every function here keeps to it, so the
neighbour lists of the two spaces and the ranks computed from them agree.
"""

from __future__ import annotations

import functools
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from functools import cached_property
from typing import NamedTuple

import numpy as np
from scipy.spatial import cKDTree
from threadpoolctl import ThreadpoolController

__all__ = [
    "Estimate",
    "Neighbourhoods",
    "block_sqdist",
    "ranking_keys",
    "half_sq_norms",
    "knn_lists",
    "neighbour_ranks",
    "sample_rows",
    "block_rows",
    "for_each_block",
    "EXACT_THRESHOLD",
    "FULL_RANK_THRESHOLD",
    "SAMPLE_SIZE",
]

# Up to this many columns squared distances are summed from differences (exact ties for
# exactly symmetric configurations); above it, |a|^2 - 2 a.b + |b|^2 through BLAS.
DIRECT_MAX_DIM = 4
# kd-trees beat brute force up to about this dimension.
TREE_MAX_DIM = 15
# Elements of one working block (float64: 32 MB).
BLOCK_ELEMENTS = 1 << 22
# Rank-based criteria are exact up to this many points and use SAMPLE_SIZE random query
# points above it; criteria that need every point's full ranks (rnx_auc: two sorts of n
# per query point) up to FULL_RANK_THRESHOLD.
EXACT_THRESHOLD = 10_000
FULL_RANK_THRESHOLD = 4_000
SAMPLE_SIZE = 2_000


class Estimate(NamedTuple):
    """A criterion's value and, when it was estimated from a sample, its standard error."""

    value: float
    standard_error: float | None = None


@functools.cache
def _blas_controller() -> ThreadpoolController:
    # Finding the loaded libraries scans the process's memory map (milliseconds); their
    # thread counts, read afterwards, are live.
    return ThreadpoolController()


def worker_threads() -> int:
    """Threads for the blocked loops: the BLAS thread limit in force (what the runner or the
    user set with threadpoolctl), else the number of CPUs."""
    blas = _blas_controller().select(user_api="blas")
    limits = [lib.num_threads for lib in blas.lib_controllers]
    return max(1, min(limits) if limits else os.cpu_count() or 1)


def for_each_block(work: Callable[[int], object], n_items: int, step: int) -> list:
    """``[work(start) for start in range(0, n_items, step)]``, the blocks run in threads.

    numpy releases the GIL in its loops, so blocks run side by side; each block's result
    depends on its own rows only, so the numbers do not depend on the thread count.
    """
    starts = range(0, n_items, step)
    threads = min(worker_threads(), len(starts))
    if threads <= 1:
        return [work(start) for start in starts]
    with ThreadPoolExecutor(max_workers=threads) as pool:
        return list(pool.map(work, starts))


def block_rows(n_columns: int, per_row: int = 1, budget: int = BLOCK_ELEMENTS) -> int:
    """Rows per block so that a block of ``per_row * n_columns`` elements a row fits."""
    return max(1, budget // max(1, n_columns * per_row))


def sample_rows(
    n: int, exact_threshold: int, sample_size: int, random_state: int | None
) -> np.ndarray | None:
    """Sorted query rows to use, or None (all rows, exact) when n <= exact_threshold."""
    if n <= exact_threshold:
        return None
    rng = np.random.default_rng(random_state)
    return np.sort(rng.choice(n, size=min(n, sample_size), replace=False))


def block_sqdist(A: np.ndarray, B: np.ndarray, b_sq: np.ndarray | None = None) -> np.ndarray:
    """Squared Euclidean distances between the rows of A and the rows of B."""
    if B.shape[1] <= DIRECT_MAX_DIM:
        return _direct_sqdist(A, B)
    if b_sq is None:
        b_sq = np.einsum("ij,ij->i", B, B)
    out = A @ B.T
    out *= -2.0
    out += np.einsum("ij,ij->i", A, A)[:, None]
    out += b_sq[None, :]
    np.maximum(out, 0.0, out=out)
    return out


def ranking_keys(A: np.ndarray, B: np.ndarray, b_half_sq: np.ndarray) -> np.ndarray:
    """Per row of A, keys that order the rows of B as their distances to it do.

    |a - b|^2 = |a|^2 + 2 (|b|^2 / 2 - a.b): within a row the order is that of
    |b|^2 / 2 - a.b, one pass over the block fewer than the distances themselves.
    ``b_half_sq`` is |b|^2 / 2 for each row of B.
    """
    if B.shape[1] <= DIRECT_MAX_DIM:
        return _direct_sqdist(A, B)
    out = A @ B.T
    np.subtract(b_half_sq[None, :], out, out=out)
    return out


def half_sq_norms(Z: np.ndarray) -> np.ndarray:
    """|z|^2 / 2 for each row, the argument :func:`ranking_keys` takes."""
    return 0.5 * np.einsum("ij,ij->i", Z, Z)


def _direct_sqdist(A: np.ndarray, B: np.ndarray) -> np.ndarray:
    out = np.subtract.outer(A[:, 0], B[:, 0])
    out *= out
    diff = np.empty_like(out) if B.shape[1] > 1 else None
    for c in range(1, B.shape[1]):
        np.subtract(A[:, c, None], B[None, :, c], out=diff)
        diff *= diff
        out += diff
    return out


def knn_lists(Z: np.ndarray, k: int) -> np.ndarray:
    """The k nearest neighbours of every row of Z (n x k, nearest first, self excluded)."""
    n = Z.shape[0]
    if Z.shape[1] > TREE_MAX_DIM or k + 2 > n:
        return _brute_knn(Z, np.arange(n), k)
    dist, idx = cKDTree(Z).query(Z, k=k + 2, workers=-1)
    rows = np.arange(n)
    is_self = idx == rows[:, None]
    # Self is missing only when k + 2 duplicates hide it; the farthest candidate goes then.
    drop = np.where(is_self.any(axis=1), is_self.argmax(axis=1), k + 1)
    keep = np.ones(idx.shape, dtype=bool)
    keep[rows, drop] = False
    idx = idx[keep].reshape(n, k + 1)
    dist = dist[keep].reshape(n, k + 1)
    order = np.lexsort((idx, dist), axis=-1)
    idx = np.take_along_axis(idx, order, axis=1)
    dist = np.take_along_axis(dist, order, axis=1)
    out = np.ascontiguousarray(idx[:, :k])
    # A tie across the k-th place may hide a lower index the tree did not return.
    tied = np.flatnonzero(dist[:, k - 1] == dist[:, k])
    if tied.size:
        out[tied] = _brute_knn(Z, tied, k)
    return out


def query_knn(Z: np.ndarray, rows: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest neighbours of the given ``rows`` of Z (self excluded) and their
    distances, nearest first: a k-d tree in few dimensions, blocked products in many."""
    rows = np.asarray(rows, dtype=np.intp)
    if Z.shape[1] > TREE_MAX_DIM or k + 2 > Z.shape[0]:
        idx = _brute_knn(Z, rows, k)
    else:
        _, found = cKDTree(Z).query(Z[rows], k=k + 1, workers=-1)
        is_self = found == rows[:, None]
        drop = np.where(is_self.any(axis=1), is_self.argmax(axis=1), k)
        keep = np.ones(found.shape, dtype=bool)
        keep[np.arange(rows.size), drop] = False
        idx = found[keep].reshape(rows.size, k)
    dist = np.sqrt(np.sum((Z[rows][:, None, :] - Z[idx]) ** 2, axis=-1))
    return idx, dist


def _brute_knn(Z: np.ndarray, rows: np.ndarray, k: int) -> np.ndarray:
    n = Z.shape[0]
    z_half = half_sq_norms(Z)
    out = np.empty((rows.size, k), dtype=np.intp)
    step = block_rows(n)

    def work(start: int) -> None:
        blk = rows[start : start + step]
        D = ranking_keys(Z[blk], Z, z_half)
        D[np.arange(blk.size), blk] = np.inf
        cand = np.argpartition(D, min(k, n - 1), axis=1)[:, : k + 1]
        cand_d = np.take_along_axis(D, cand, axis=1)
        order = np.lexsort((cand, cand_d), axis=-1)
        cand = np.take_along_axis(cand, order, axis=1)
        cand_d = np.take_along_axis(cand_d, order, axis=1)
        res = cand[:, :k]
        # A tie across the k-th place: the partition may have kept a higher index.
        for r in np.flatnonzero(cand_d[:, k - 1] == cand_d[:, k]):
            res[r] = np.argsort(D[r], kind="stable")[:k]
        out[start : start + blk.size] = res

    for_each_block(work, rows.size, step)
    return out


def neighbour_ranks(Z: np.ndarray, rows: np.ndarray, neighbours: np.ndarray) -> np.ndarray:
    """Rank in Z of ``neighbours[r, m]`` among the neighbours of ``rows[r]``.

    Exact: the distances from each query row to all points are computed in blocks and the
    points closer than each neighbour are counted (lower index first on ties).
    """
    n = Z.shape[0]
    K = neighbours.shape[1]
    z_half = half_sq_norms(Z)
    out = np.empty(neighbours.shape, dtype=np.int64)
    dist_step = block_rows(n)
    count_step = block_rows(n, K, budget=BLOCK_ELEMENTS * 2)

    def work(start: int) -> None:
        blk = rows[start : start + dist_step]
        D = ranking_keys(Z[blk], Z, z_half)
        D[np.arange(blk.size), blk] = np.inf  # i is nobody's rank
        for s in range(0, blk.size, count_step):
            sub = D[s : s + count_step]
            nb = neighbours[start + s : start + s + sub.shape[0]]
            thresholds = np.take_along_axis(sub, nb, axis=1)
            near = _within(sub, thresholds.max(axis=1))
            # Counted in float32, twice as fast; rounding is monotone, so an entry below a
            # threshold in float32 is below it in float64 too. Only where another entry
            # rounds level with the threshold is the float32 count unsure: count exactly.
            less, at_most = _count_below(near.astype(np.float32), thresholds.astype(np.float32))
            ranks = less + 1
            for r, m in zip(*np.nonzero(at_most > ranks), strict=True):
                row, t = sub[r], thresholds[r, m]
                earlier = np.count_nonzero(row[: nb[r, m]] == t)
                ranks[r, m] = np.count_nonzero(row < t) + earlier + 1
            out[start + s : start + s + sub.shape[0]] = ranks

    for_each_block(work, rows.size, dist_step)
    return out


def _within(D: np.ndarray, radius: np.ndarray) -> np.ndarray:
    """The entries of each row of D that are at most its radius, padded with inf.

    Only those can precede a neighbour, and for a fair embedding they are few: counting
    against them instead of whole rows saves most of the work.
    """
    mask = D <= radius[:, None]
    per_row = np.count_nonzero(mask, axis=1)
    width = int(per_row.max())
    if 2 * width > D.shape[1]:
        return D
    flat = np.flatnonzero(mask)
    row = flat // D.shape[1]
    starts = np.cumsum(per_row) - per_row
    out = np.full((D.shape[0], width), np.inf)
    out.ravel()[row * width + np.arange(flat.size) - starts[row]] = D.ravel()[flat]
    return out


def _count_below(near: np.ndarray, thresholds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per row, how many entries of float32 ``near`` are below, and at most, each threshold."""
    K, width = thresholds.shape[1], near.shape[1]
    # Nanoseconds an entry, measured with numpy 2.4: comparing with every threshold (twice)
    # about 1.2 K; sorting the row about 0.7 log2(width).
    if 1.2 * K <= 0.7 * np.log2(max(width, 2)):
        cube = near[:, None, :]
        less = _count(np.less(cube, thresholds[:, :, None]))
        at_most = _count(np.less_equal(cube, thresholds[:, :, None]))
        return less, at_most
    ordered = np.sort(near, axis=1)
    if width > 1000:  # a search call a row costs little against a wide row
        less = np.empty(thresholds.shape, dtype=np.intp)
        at_most = np.empty(thresholds.shape, dtype=np.intp)
        for r in range(near.shape[0]):
            less[r] = np.searchsorted(ordered[r], thresholds[r], side="left")
            at_most[r] = np.searchsorted(ordered[r], thresholds[r], side="right")
        return less, at_most
    # Keys (row, value) in one uint64 make the row-sorted entries one sorted array, so one
    # search serves every row.
    rows = np.arange(near.shape[0], dtype=np.uint64)[:, None] << np.uint64(32)
    keys = (_ordered_bits(ordered) | rows).ravel()
    probes = _ordered_bits(thresholds) | rows
    offsets = (np.arange(near.shape[0]) * width)[:, None]
    less = np.searchsorted(keys, probes, side="left") - offsets
    at_most = np.searchsorted(keys, probes, side="right") - offsets
    return less, at_most


def _ordered_bits(values: np.ndarray) -> np.ndarray:
    """float32 values as uint64 integers in the same order (equal values, equal integers)."""
    bits = (values + np.float32(0.0)).view(np.uint32)  # + 0.0 turns -0.0 into +0.0
    # The usual flip: negative floats reversed below the positive ones.
    bits ^= (np.uint32(0) - (bits >> np.uint32(31))) | np.uint32(0x80000000)
    return bits.astype(np.uint64)


def _count(mask: np.ndarray) -> np.ndarray:
    # Summing the bytes of a boolean array is several times faster than summing bools.
    return np.add.reduce(mask.view(np.uint8), axis=2, dtype=np.int32)


class Neighbourhoods:
    """The neighbour structure of one (X, Y) pair, computed once and shared by the criteria.

    Parameters
    ----------
    X, Y : ndarray of shape (n, D) and (n, d)
        Checked input and embedding.
    k_lists : int
        Length of the neighbour lists kept for both spaces (the largest K any criterion needs).
    rows : ndarray or None
        Query rows for the rank-based criteria (None: all rows, exact).
    full_rows : ndarray or None
        Query rows for the criteria that need full ranks (None: all rows, exact).
    memo : dict or None
        Where values that depend on X alone are kept across embeddings of the same X.
    """

    def __init__(
        self,
        X: np.ndarray,
        Y: np.ndarray,
        *,
        k_lists: int,
        rows: np.ndarray | None = None,
        full_rows: np.ndarray | None = None,
        memo: dict | None = None,
    ) -> None:
        self.X = X
        # Values that depend on X alone, kept across embeddings (lowdim.metrics._input_memo).
        self.memo = memo
        self.Y = Y
        self.n = X.shape[0]
        self.k_lists = k_lists
        self.sampled = rows is not None
        self.rows = np.arange(self.n) if rows is None else rows
        self.full_sampled = full_rows is not None
        self.full_rows = np.arange(self.n) if full_rows is None else full_rows
        self._ranks: dict[str, np.ndarray] = {}
        # Results other criteria share (e.g. the full co-ranking), by name.
        self.cache: dict[str, object] = {}

    @cached_property
    def nx(self) -> np.ndarray:
        """The k_lists nearest neighbours of every point in the input space."""
        kept = None if self.memo is None else self.memo.get("lists")
        if kept is not None and kept.shape[1] >= self.k_lists:
            # The first k of the exact (distance, index) order are the k nearest.
            return np.ascontiguousarray(kept[:, : self.k_lists])
        lists = knn_lists(self.X, self.k_lists)
        if self.memo is not None:
            lists.setflags(write=False)  # shared by later embeddings: never changed in place
            self.memo["lists"] = lists
        return lists

    @cached_property
    def ny(self) -> np.ndarray:
        """The k_lists nearest neighbours of every point in the embedding."""
        return knn_lists(self.Y, self.k_lists)

    def ranks_in_x(self, k: int) -> np.ndarray:
        """Input-space ranks of the query rows' k nearest embedding neighbours."""
        return self._cached_ranks("x", k, self.X, self.ny)

    def ranks_in_y(self, k: int) -> np.ndarray:
        """Embedding ranks of the query rows' k nearest input-space neighbours."""
        return self._cached_ranks("y", k, self.Y, self.nx)

    def _cached_ranks(self, space: str, k: int, Z: np.ndarray, lists: np.ndarray) -> np.ndarray:
        have = self._ranks.get(space)
        if have is None or have.shape[1] < k:
            have = neighbour_ranks(Z, self.rows, lists[self.rows, :k])
            self._ranks[space] = have
        return have[:, :k]

    def mean_and_error(self, per_row: np.ndarray, *, sampled: bool) -> Estimate:
        """Mean of a per-query-row quantity; with its standard error when rows are sampled.

        The error includes the finite-population correction for sampling without
        replacement (Cochran, Sampling Techniques, 3rd ed., 1977, eq. 2.12).
        """
        mean = float(per_row.mean())
        if not sampled:
            return Estimate(mean)
        m = per_row.size
        if m < 2:
            return Estimate(mean, float("nan"))
        fpc = 1.0 - m / self.n
        return Estimate(mean, float(per_row.std(ddof=1) / np.sqrt(m) * np.sqrt(fpc)))
