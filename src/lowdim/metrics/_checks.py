"""Checks of the criteria's inputs, each mistake worded as one sentence."""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np

from lowdim._validation import check_data
from lowdim.errors import InputError

__all__ = ["check_pair", "check_k", "check_labels", "check_truth", "DEFAULT_K"]

# K used when a criterion that takes one is called without it.
DEFAULT_K = 10


def check_pair(X: Any, Y: Any, owner: str) -> tuple[np.ndarray, np.ndarray]:
    """Return X and Y as float64 arrays with the same number of rows, or raise InputError."""
    _refuse_non_finite_embedding(Y, owner)
    X = check_data(X, owner, min_samples=3, name="X")
    Y = check_data(Y, owner, min_samples=3, name="Y")
    if X.shape[0] != Y.shape[0]:
        raise InputError(
            f"`X` has {X.shape[0]} rows but the embedding `Y` given to `{owner}` has "
            f"{Y.shape[0]}; pass the embedding of exactly these samples, one row per sample"
        )
    for name, arr, what in (("X", X, "the data"), ("Y", Y, "the embedding")):
        if not np.any(arr != arr[0]):
            raise InputError(
                f"every row of `{name}` given to `{owner}` is the same point, so {what} has "
                "no neighbourhoods or distances to compare; check the method or the data"
            )
    return X, Y


def _refuse_non_finite_embedding(Y: Any, owner: str) -> None:
    try:
        arr = np.asarray(Y, dtype=np.float64)
    except (TypeError, ValueError):
        return  # check_data words non-numeric input
    bad = ~np.isfinite(arr)
    if bad.any():
        first = np.argwhere(bad)[0]
        raise InputError(
            f"the embedding `Y` given to `{owner}` contains NaN or infinity "
            f"({int(bad.sum())} values, first at index {tuple(int(i) for i in first)}); the "
            "method did not produce finite coordinates, so the embedding cannot be scored"
        )


def check_k(k: Any, n: int, owner: str, k_max: int, rule: str) -> int:
    """Return ``k`` (DEFAULT_K when None) as an int in [1, k_max], or raise InputError."""
    if k is None:
        k = DEFAULT_K
    if isinstance(k, bool | np.bool_) or not isinstance(k, numbers.Integral):
        raise InputError(f"the parameter `k` of `{owner}` must be an int, got {k!r}")
    k = int(k)
    if k < 1:
        raise InputError(f"the parameter `k` of `{owner}` must be at least 1, got {k}")
    if k > k_max:
        raise InputError(
            f"the parameter `k` of `{owner}` must satisfy {rule} for these {n} samples "
            f"(at most {k_max}), got {k}; choose a smaller k"
        )
    return k


def check_labels(labels: Any, n: int, owner: str) -> tuple[np.ndarray, int]:
    """Return labels coded as ints 0 .. c-1 and the number of classes c, or raise InputError."""
    if labels is None:
        raise InputError(
            f"`{owner}` needs class labels: pass `labels`, one per row of X, or choose a "
            "criterion that does not need them"
        )
    arr = np.asarray(labels)
    if arr.ndim != 1 or arr.shape[0] != n:
        raise InputError(
            f"`labels` given to `{owner}` must be one label per row of X ({n}), got shape "
            f"{arr.shape}"
        )
    _, codes = np.unique(arr, return_inverse=True)
    return codes.reshape(-1), int(codes.max()) + 1


def check_truth(truth: Any, n: int, owner: str) -> np.ndarray:
    """Return the intrinsic coordinates as an n x d float64 array, or raise InputError."""
    if truth is None:
        raise InputError(
            f"`{owner}` needs the intrinsic (ground-truth) coordinates: pass `truth`, one row "
            "per row of X, or choose a criterion that does not need them"
        )
    arr = np.asarray(truth, dtype=np.float64)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2 or arr.shape[0] != n:
        raise InputError(
            f"`truth` given to `{owner}` must have one row per row of X ({n}), got shape "
            f"{np.shape(truth)}"
        )
    if not np.isfinite(arr).all():
        raise InputError(f"`truth` given to `{owner}` contains NaN or infinity")
    return np.ascontiguousarray(arr)
