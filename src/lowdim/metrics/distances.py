"""Global criteria on all pairwise distances: Spearman correlation and scale-invariant stress.

Both look at every pair of points, so for large n they use all pairs among a random subset
of ``pair_points`` points (2 million pairs at the default 2,000).

References
----------
.. [1] C. Spearman, "The proof and measurement of association between two things", Amer. J.
   Psychol. 15(1), pp. 72-101, 1904. :doi:`10.2307/1412159`
.. [2] K. Smelser, J. Miller and S. Kobourov, "'Normalized stress' is not normalized: how to
   interpret stress correctly", IEEE BELIV 2024. arXiv:2408.07724
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike
from scipy.spatial.distance import pdist

from lowdim.errors import InputError
from lowdim.metrics._checks import check_pair
from lowdim.metrics._registry import register_metric

__all__ = [
    "distance_spearman",
    "stress",
    "stress_parts",
    "StressParts",
    "pair_subset",
    "spearman_of_distances",
    "spearman_of_ranks",
    "centred_distance_ranks",
    "average_ranks",
    "PAIR_POINTS",
]

# Above this many points the pair criteria use all pairs among this many random points.
PAIR_POINTS = 2_000


def pair_subset(n: int, pair_points: int, random_state: int | None) -> np.ndarray | None:
    """Sorted random subset of points whose pairs are used, or None for all points."""
    if n <= pair_points:
        return None
    rng = np.random.default_rng(random_state)
    return np.sort(rng.choice(n, size=pair_points, replace=False))


def _sum_of_products(a: np.ndarray, b: np.ndarray) -> float:
    # numpy's pairwise summation, not BLAS dot: the same bits whatever the thread count.
    return float(np.multiply(a, b).sum())


def _pairs(Z: np.ndarray, subset: np.ndarray | None) -> np.ndarray:
    return pdist(Z if subset is None else Z[subset])


def average_ranks(values: np.ndarray) -> np.ndarray:
    """Ranks 1 .. m of ``values``, ties given their average rank (as for Spearman's rho)."""
    order = np.argsort(values)
    ordered = values[order]
    starts = np.flatnonzero(np.concatenate([[True], ordered[1:] != ordered[:-1]]))
    bounds = np.append(starts, values.size)
    group = np.repeat(np.arange(starts.size), np.diff(bounds))
    ranks = np.empty(values.size)
    ranks[order] = 0.5 * (bounds[:-1] + bounds[1:] + 1)[group]
    return ranks


def centred_distance_ranks(Z: np.ndarray, subset: np.ndarray | None) -> np.ndarray:
    """Average ranks of the pairwise distances of Z, minus their mean."""
    ranks = average_ranks(_pairs(Z, subset))
    ranks -= ranks.mean()
    return ranks


def spearman_of_ranks(ra: np.ndarray, rb: np.ndarray, owner: str) -> float:
    """Pearson correlation of two centred rank vectors: Spearman's rho."""
    denominator = np.sqrt(_sum_of_products(ra, ra) * _sum_of_products(rb, rb))
    if denominator == 0.0:
        raise InputError(
            f"`{owner}` is undefined here: all pairwise distances of one of the two point "
            "sets are equal"
        )
    return float(_sum_of_products(ra, rb) / denominator)


def spearman_of_distances(
    A: np.ndarray, B: np.ndarray, subset: np.ndarray | None, owner: str
) -> float:
    """Spearman correlation between the pairwise distances of A and of B."""
    return spearman_of_ranks(
        centred_distance_ranks(A, subset), centred_distance_ranks(B, subset), owner
    )


class StressParts(NamedTuple):
    """Normalized stress NS(alpha) of Smelser, Miller & Kobourov (2024) at alpha = 1 and at
    its minimiser alpha* (the scale-invariant stress)."""

    optimal_scale: float
    raw: float
    scale_invariant: float


def stress_parts(X: np.ndarray, Y: np.ndarray, subset: np.ndarray | None = None) -> StressParts:
    """alpha* = sum dX dY / sum dY^2, NS(1), and SNS = NS(alpha*).

    NS(alpha) = sum_{i<j} (dX_ij - alpha dY_ij)^2 / sum dX_ij^2; its minimum over alpha is
    SNS = 1 - (sum dX dY)^2 / (sum dX^2 sum dY^2), in [0, 1] and 0 exactly when the
    embedding distances are proportional to the input distances.
    """
    dx = _pairs(X, subset)
    dy = _pairs(Y, subset)
    xx, yy, xy = _sum_of_products(dx, dx), _sum_of_products(dy, dy), _sum_of_products(dx, dy)
    raw = float(_sum_of_products(dx - dy, dx - dy) / xx)
    return StressParts(float(xy / yy), raw, float(max(0.0, 1.0 - xy * xy / (xx * yy))))


@register_metric(
    "distance_spearman",
    headline=6,
    scope="global",
    higher_is_better=True,
    source="Spearman, Amer. J. Psychol. 15, 1904 (rank correlation of pairwise distances)",
    description="Spearman rank correlation between all pairwise distances in the input and in "
    "the embedding",
)
def distance_spearman(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    pair_points: int = PAIR_POINTS,
    random_state: int | None = 0,
) -> float:
    """Spearman correlation between the pairwise distances of X and of Y.

    Uses all pairs for n up to ``pair_points``, else all pairs among that many random points.

    References
    ----------
    .. [1] C. Spearman, Amer. J. Psychol. 15(1), pp. 72-101, 1904.
    """
    X, Y = check_pair(X, Y, "distance_spearman")
    subset = pair_subset(X.shape[0], pair_points, random_state)
    return spearman_of_distances(X, Y, subset, "distance_spearman")


@register_metric(
    "stress",
    scope="global",
    higher_is_better=False,
    source="Smelser, Miller & Kobourov, IEEE BELIV 2024 (arXiv 2408.07724)",
    description="normalized stress after rescaling the embedding optimally: 0 when its "
    "distances are proportional to the input's, at most 1",
)
def stress(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    pair_points: int = PAIR_POINTS,
    random_state: int | None = 0,
) -> float:
    """Scale-invariant normalized stress SNS = min over alpha of NS(alpha).

    NS(alpha) = sum_{i<j} (dX_ij - alpha dY_ij)^2 / sum dX_ij^2. Plain normalized stress
    (alpha = 1) rewards an embedding for its scale rather than its shape; minimising over
    alpha removes that (Smelser, Miller & Kobourov 2024). See :func:`stress_parts` for
    alpha* and NS(1).

    References
    ----------
    .. [1] K. Smelser, J. Miller and S. Kobourov, IEEE BELIV 2024. arXiv:2408.07724
    """
    X, Y = check_pair(X, Y, "stress")
    subset = pair_subset(X.shape[0], pair_points, random_state)
    return stress_parts(X, Y, subset).scale_invariant
