"""Label criteria: leave-one-out K-nearest-neighbour accuracy and the silhouette, in the embedding.

References
----------
.. [1] L. J. P. van der Maaten, E. O. Postma and H. J. van den Herik, "Dimensionality
   reduction: a comparative review", Tilburg University TiCC TR 2009-005, 2009.
.. [2] P. J. Rousseeuw, "Silhouettes: a graphical aid to the interpretation and validation of
   cluster analysis", J. Comput. Appl. Math. 20, pp. 53-65, 1987.
   :doi:`10.1016/0377-0427(87)90125-7`
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
from numpy.typing import ArrayLike

from lowdim.errors import InputError
from lowdim.metrics._checks import check_k, check_labels, check_pair
from lowdim.metrics._neighbors import (
    EXACT_THRESHOLD,
    SAMPLE_SIZE,
    Estimate,
    Neighbourhoods,
    block_rows,
    block_sqdist,
    for_each_block,
    sample_rows,
)
from lowdim.metrics._registry import register_metric

__all__ = ["knn_accuracy", "silhouette", "knn_accuracy_at", "silhouette_estimate"]


def knn_accuracy_at(ctx: Neighbourhoods, codes: np.ndarray, ks: Iterable[int]) -> dict:
    """Leave-one-out accuracy of the k-nearest-neighbour vote in the embedding, for each k.

    Each point is classified by the majority label of its k nearest neighbours in Y (itself
    excluded); a tie between classes goes to the tied class whose member is nearest.
    """
    out = {}
    for k in ks:
        votes = codes[ctx.ny[:, :k]]
        predicted = np.empty(ctx.n, dtype=codes.dtype)
        step = block_rows(k, k)
        for start in range(0, ctx.n, step):
            v = votes[start : start + step]
            # support[i, m]: how many of i's k neighbours share the label of its m-th
            # neighbour; argmax takes the first, i.e. nearest, of the best supported.
            support = np.count_nonzero(v[:, :, None] == v[:, None, :], axis=2)
            predicted[start : start + step] = v[np.arange(v.shape[0]), support.argmax(axis=1)]
        out[k] = Estimate(float(np.mean(predicted == codes)))
    return out


def silhouette_estimate(
    Y: np.ndarray, codes: np.ndarray, n_classes: int, rows: np.ndarray | None
) -> Estimate:
    """Mean silhouette of the query rows (all rows when ``rows`` is None), with Euclidean
    distances in Y computed in blocks.

    s(i) = (b(i) - a(i)) / max(a(i), b(i)), a(i) the mean distance to the other members of
    i's class, b(i) the least mean distance to another class; 0 for a class of one point
    (Rousseeuw 1987, as scikit-learn's ``silhouette_score``).
    """
    n = Y.shape[0]
    order = np.argsort(codes, kind="stable")
    sizes = np.bincount(codes, minlength=n_classes)
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    grouped = Y[order]
    where = np.empty(n, dtype=np.intp)
    where[order] = np.arange(n)
    query = np.arange(n) if rows is None else rows
    values = np.empty(query.size)
    step = block_rows(n)

    def work(start: int) -> None:
        blk = query[start : start + step]
        D = np.sqrt(block_sqdist(Y[blk], grouped))
        D[np.arange(blk.size), where[blk]] = 0.0  # exactly, whatever the rounding
        sums = np.add.reduceat(D, starts, axis=1)
        own = codes[blk]
        intra = sums[np.arange(blk.size), own] / np.maximum(sizes[own] - 1, 1)
        sums /= sizes
        sums[np.arange(blk.size), own] = np.inf
        inter = sums.min(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            s = (inter - intra) / np.maximum(intra, inter)
        s[(sizes[own] == 1) | ~np.isfinite(s)] = 0.0
        values[start : start + blk.size] = s

    for_each_block(work, query.size, step)
    mean = float(values.mean())
    if rows is None:
        return Estimate(mean)
    fpc = 1.0 - rows.size / n
    return Estimate(mean, float(values.std(ddof=1) / np.sqrt(rows.size) * np.sqrt(fpc)))


def check_classes(n_classes: int, n: int, owner: str) -> None:
    """The silhouette needs 2 <= classes <= n - 1."""
    if not 2 <= n_classes <= n - 1:
        raise InputError(
            f"`{owner}` needs between 2 and n - 1 = {n - 1} distinct labels, got {n_classes}; "
            "it compares each point's own class with the others"
        )


@register_metric(
    "knn_accuracy",
    headline=4,
    higher_is_better=True,
    needs="labels",
    uses_k=True,
    k_rule="1 <= k <= n - 1",
    k_max=lambda n: n - 1,
    source="van der Maaten, Postma & van den Herik, TiCC TR 2009-005 (1-NN protocol)",
    description="leave-one-out accuracy of a k-nearest-neighbour majority vote in the embedding",
)
def knn_accuracy(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Leave-one-out k-nearest-neighbour accuracy of the labels in the embedding.

    k = 1 gives the 1-NN generalization-error protocol of van der Maaten, Postma & van den
    Herik (2009) as 1 - error. Ties between classes go to the class whose member is nearest.

    References
    ----------
    .. [1] L. J. P. van der Maaten, E. O. Postma and H. J. van den Herik, TiCC TR 2009-005.
    """
    X, Y = check_pair(X, Y, "knn_accuracy")
    n = X.shape[0]
    codes, _ = check_labels(labels, n, "knn_accuracy")
    k = check_k(k, n, "knn_accuracy", n - 1, "1 <= k <= n - 1")
    return knn_accuracy_at(Neighbourhoods(X, Y, k_lists=k), codes, [k])[k].value


@register_metric(
    "silhouette",
    higher_is_better=True,
    needs="labels",
    source="Rousseeuw, J. Comput. Appl. Math. 20, 1987",
    description="how much closer each point is to its own class than to the nearest other "
    "class in the embedding, from -1 to 1",
)
def silhouette(
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
    """Mean silhouette width of the labelled classes in the embedding (Rousseeuw 1987).

    Exact up to ``exact_threshold`` points; above it the mean over ``sample_size`` random
    points (each against all points).

    References
    ----------
    .. [1] P. J. Rousseeuw, J. Comput. Appl. Math. 20, pp. 53-65, 1987.
    """
    X, Y = check_pair(X, Y, "silhouette")
    n = X.shape[0]
    codes, n_classes = check_labels(labels, n, "silhouette")
    check_classes(n_classes, n, "silhouette")
    rows = sample_rows(n, exact_threshold, sample_size, random_state)
    return silhouette_estimate(Y, codes, n_classes, rows).value
