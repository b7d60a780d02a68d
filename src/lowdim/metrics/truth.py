"""Ground-truth criteria for generated data: how well the embedding recovers the intrinsic
coordinates.

References
----------
.. [1] J. C. Gower, "Generalized Procrustes analysis", Psychometrika 40(1), pp. 33-51, 1975.
   :doi:`10.1007/BF02291478`
.. [2] C. Spearman, Amer. J. Psychol. 15(1), pp. 72-101, 1904.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from lowdim.errors import InputError
from lowdim.metrics._checks import check_pair, check_truth
from lowdim.metrics._registry import register_metric
from lowdim.metrics.distances import PAIR_POINTS, pair_subset, spearman_of_distances

__all__ = ["truth_spearman", "truth_procrustes", "procrustes_disparity"]


def procrustes_disparity(T: np.ndarray, Y: np.ndarray) -> float:
    """Sum of squared differences after the best similarity transform of Y onto T.

    Both sets are centred and scaled to unit Frobenius norm; the best rotation (or
    reflection) and scale then leave 1 - (sum of singular values of T^T Y)^2.
    """
    A = T - T.mean(axis=0)
    B = Y - Y.mean(axis=0)
    A /= np.linalg.norm(A)
    B /= np.linalg.norm(B)
    # Summed by numpy rather than BLAS so that the bits do not depend on the thread count.
    cross = (A[:, :, None] * B[:, None, :]).sum(axis=0)
    s = np.linalg.svd(cross, compute_uv=False)
    return float(max(0.0, 1.0 - s.sum() ** 2))


def procrustes_mismatch(truth: np.ndarray, Y: np.ndarray) -> str | None:
    """Why the Procrustes criterion does not apply, or None when it does."""
    if truth.shape[1] != Y.shape[1]:
        return (
            f"the truth has {truth.shape[1]} dimension(s) and the embedding {Y.shape[1]}; "
            "Procrustes needs the same number"
        )
    if not np.any(truth != truth[0]):
        return "every row of the truth is the same point"
    return None


@register_metric(
    "truth_spearman",
    headline=5,
    higher_is_better=True,
    needs="truth",
    source="Spearman, Amer. J. Psychol. 15, 1904 (against the intrinsic coordinates)",
    description="Spearman rank correlation between pairwise distances in the embedding and in "
    "the intrinsic coordinates",
)
def truth_spearman(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    pair_points: int = PAIR_POINTS,
    random_state: int | None = 0,
) -> float:
    """Spearman correlation between the pairwise distances of the truth and of Y.

    All pairs for n up to ``pair_points``, else all pairs among that many random points.
    """
    X, Y = check_pair(X, Y, "truth_spearman")
    T = check_truth(truth, X.shape[0], "truth_spearman")
    subset = pair_subset(X.shape[0], pair_points, random_state)
    return spearman_of_distances(T, Y, subset, "truth_spearman")


@register_metric(
    "truth_procrustes",
    higher_is_better=False,
    needs="truth",
    source="Gower, Psychometrika 40, 1975 (Procrustes disparity)",
    description="squared error left after the best rotation, reflection, scaling and shift of "
    "the embedding onto the intrinsic coordinates, from 0 to 1",
)
def truth_procrustes(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Procrustes disparity between the truth and Y (same number of dimensions required).

    References
    ----------
    .. [1] J. C. Gower, Psychometrika 40(1), pp. 33-51, 1975.
    """
    X, Y = check_pair(X, Y, "truth_procrustes")
    T = check_truth(truth, X.shape[0], "truth_procrustes")
    problem = procrustes_mismatch(T, Y)
    if problem is not None:
        raise InputError(f"`truth_procrustes` does not apply: {problem}")
    return procrustes_disparity(T, Y)
