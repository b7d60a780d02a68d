"""Neighbourhood criteria: trustworthiness, continuity and K-nearest-neighbour recall.

References
----------
.. [1] J. Venna and S. Kaski, "Neighborhood preservation in nonlinear projection methods: an
   experimental study", ICANN 2001, LNCS 2130, pp. 485-491. :doi:`10.1007/3-540-44668-0_68`
.. [2] J. Venna and S. Kaski, "Local multidimensional scaling", Neural Networks 19(6-7),
   pp. 889-899, 2006. :doi:`10.1016/j.neunet.2006.05.014`
.. [3] J. Venna, J. Peltonen, K. Nybo, H. Aidos and S. Kaski, "Information retrieval perspective
   to nonlinear dimensionality reduction for data visualization", JMLR 11, pp. 451-490, 2010.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
from numpy.typing import ArrayLike

from lowdim.metrics._checks import check_k, check_pair
from lowdim.metrics._neighbors import (
    EXACT_THRESHOLD,
    SAMPLE_SIZE,
    Estimate,
    Neighbourhoods,
    sample_rows,
)
from lowdim.metrics._registry import register_metric

__all__ = [
    "trustworthiness",
    "continuity",
    "knn_recall",
    "trustworthiness_at",
    "continuity_at",
    "knn_recall_at",
    "tc_k_max",
    "penalised_terms",
]

VENNA_KASKI = "Venna & Kaski, ICANN 2001; Neural Networks 19, 2006"
TC_RULE = "1 <= k < n/2 (the range of Venna & Kaski's formula)"


def tc_k_max(n: int) -> int:
    """Largest k with k < n/2, the range in which T and C lie in [0, 1]."""
    return (n - 1) // 2


def penalised_terms(ranks: np.ndarray, n: int, k: int) -> np.ndarray:
    """Each row's term of T(k) or C(k), scaled so that their mean over all rows is the value.

    T(k) = 1 - A sum_i sum_{j in U_k(i)} (r(i, j) - k), A = 2 / (n k (2n - 3k - 1)), is the
    mean of t_i = 1 - n A sum_j max(0, r(i, j) - k) over the rows; ``ranks[:, :k]`` are the
    ranks in one space of each row's k nearest in the other (X for T, Y for C).
    """
    excess = np.maximum(ranks[:, :k] - k, 0).sum(axis=1)
    return 1.0 - excess * (2.0 / (k * (2.0 * n - 3.0 * k - 1.0)))


def _penalised(ctx: Neighbourhoods, ranks: np.ndarray, ks: Iterable[int]) -> dict[int, Estimate]:
    return {
        k: ctx.mean_and_error(penalised_terms(ranks, ctx.n, k), sampled=ctx.sampled) for k in ks
    }


def trustworthiness_at(ctx: Neighbourhoods, ks: Iterable[int]) -> dict[int, Estimate]:
    """Trustworthiness T(k) for each k, from the shared neighbour structure."""
    ks = list(ks)
    return _penalised(ctx, ctx.ranks_in_x(max(ks)), ks)


def continuity_at(ctx: Neighbourhoods, ks: Iterable[int]) -> dict[int, Estimate]:
    """Continuity C(k) for each k, from the shared neighbour structure."""
    ks = list(ks)
    return _penalised(ctx, ctx.ranks_in_y(max(ks)), ks)


def knn_recall_at(ctx: Neighbourhoods, ks: Iterable[int]) -> dict[int, Estimate]:
    """Mean share of each point's k input-space neighbours among its k embedding neighbours."""
    out = {}
    for k in ks:
        both = np.sort(np.concatenate([ctx.nx[:, :k], ctx.ny[:, :k]], axis=1), axis=1)
        shared = np.count_nonzero(both[:, 1:] == both[:, :-1], axis=1)
        out[k] = Estimate(float(shared.sum()) / (ctx.n * k))
    return out


def _context(
    X: ArrayLike,
    Y: ArrayLike,
    k: int | None,
    owner: str,
    k_max,
    rule: str,
    exact_threshold: int,
    sample_size: int,
    random_state: int | None,
) -> tuple[Neighbourhoods, int]:
    X, Y = check_pair(X, Y, owner)
    n = X.shape[0]
    k = check_k(k, n, owner, k_max(n), rule)
    rows = sample_rows(n, exact_threshold, sample_size, random_state)
    return Neighbourhoods(X, Y, k_lists=k, rows=rows), k


@register_metric(
    "trustworthiness",
    headline=2,
    higher_is_better=True,
    uses_k=True,
    k_rule=TC_RULE,
    k_max=tc_k_max,
    source=VENNA_KASKI,
    description="penalises points that are among a point's k nearest in the embedding but "
    "not in the input, by how far they are in the input",
)
def trustworthiness(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    exact_threshold: int = EXACT_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
    random_state: int | None = 0,
) -> float:
    """Trustworthiness T(k) of an embedding (Venna & Kaski 2001).

    T(k) = 1 - 2 / (n k (2n - 3k - 1)) sum_i sum_{j in U_k(i)} (r(i, j) - k), where U_k(i)
    holds the points among i's k nearest in Y but not in X and r(i, j) is the rank of j
    among i's neighbours in X (ties to the lower index).

    Parameters
    ----------
    X : array-like of shape (n, D)
        The input data.
    Y : array-like of shape (n, d)
        The embedding of the same n points.
    k : int, default=10
        Neighbourhood size, 1 <= k < n/2 (the formula's range).
    labels, truth : ignored
        Accepted so that every criterion has the same signature.
    exact_threshold : int, default=10000
        Exact for n up to this; above it, estimated from ``sample_size`` random query points
        (against all points).
    sample_size : int, default=2000
        Query points used above the threshold.
    random_state : int or None, default=0
        Seed for choosing the query points.

    Returns
    -------
    float
        T(k) in [0, 1]; 1 when every embedding neighbour is an input neighbour.

    References
    ----------
    .. [1] J. Venna and S. Kaski, ICANN 2001, pp. 485-491. :doi:`10.1007/3-540-44668-0_68`
    """
    ctx, k = _context(
        X, Y, k, "trustworthiness", tc_k_max, TC_RULE, exact_threshold, sample_size, random_state
    )
    return trustworthiness_at(ctx, [k])[k].value


@register_metric(
    "continuity",
    headline=3,
    higher_is_better=True,
    uses_k=True,
    k_rule=TC_RULE,
    k_max=tc_k_max,
    source=VENNA_KASKI,
    description="penalises points that are among a point's k nearest in the input but not in "
    "the embedding, by how far they are in the embedding",
)
def continuity(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    exact_threshold: int = EXACT_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
    random_state: int | None = 0,
) -> float:
    """Continuity C(k) of an embedding (Venna & Kaski 2001): trustworthiness, spaces swapped.

    C(k) = 1 - 2 / (n k (2n - 3k - 1)) sum_i sum_{j in V_k(i)} (r_Y(i, j) - k), where V_k(i)
    holds the points among i's k nearest in X but not in Y. Parameters as for
    :func:`trustworthiness`.

    References
    ----------
    .. [1] J. Venna and S. Kaski, ICANN 2001, pp. 485-491. :doi:`10.1007/3-540-44668-0_68`
    """
    ctx, k = _context(
        X, Y, k, "continuity", tc_k_max, TC_RULE, exact_threshold, sample_size, random_state
    )
    return continuity_at(ctx, [k])[k].value


@register_metric(
    "knn_recall",
    higher_is_better=True,
    uses_k=True,
    k_rule="1 <= k <= n - 1",
    k_max=lambda n: n - 1,
    source="Venna, Peltonen, Nybo, Aidos & Kaski, JMLR 11, 2010 (recall of K-neighbourhoods)",
    description="mean share of each point's k nearest input neighbours that are also among "
    "its k nearest in the embedding",
)
def knn_recall(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Mean recall of the k-nearest-neighbour sets: |N_k^X(i) ∩ N_k^Y(i)| / k over i.

    With neighbourhoods of equal size, recall equals precision and equals Q_NX(k) of Lee &
    Verleysen (2009). Exact at every n (it needs the k nearest lists only).

    References
    ----------
    .. [1] J. Venna et al., "Information retrieval perspective to nonlinear dimensionality
       reduction for data visualization", JMLR 11, pp. 451-490, 2010.
    """
    X, Y = check_pair(X, Y, "knn_recall")
    n = X.shape[0]
    k = check_k(k, n, "knn_recall", n - 1, "1 <= k <= n - 1")
    return knn_recall_at(Neighbourhoods(X, Y, k_lists=k), [k])[k].value
