"""Preprocessing named in a dataset spec, applied in a fixed order: log1p, scale, pca_first.

``log1p = true`` maps each value x to log(1 + x) (count data); ``scale = "standard"`` centres
each column and divides by its standard deviation (ddof = 0), ``"robust"`` subtracts each
column's median and divides by its interquartile range (so a few extreme values do not set the
unit), ``"minmax"`` maps each column onto [0, 1]; ``pca_first = N`` keeps the first N
principal components (a common first step before a nonlinear method on wide data, common
practice).

Standard scaling first divides each column by its largest magnitude, which leaves its result
unchanged in exact arithmetic but keeps the squares of the standard deviation inside float64
for values near 1e300 or 1e-300 (the other scalings square nothing). Values whose squares
would still overflow or underflow are refused before ``pca_first``
(:func:`lowdim.datasets.checks.check_magnitude`).
"""

from __future__ import annotations

import numpy as np

from lowdim._validation import BOOL, NONE, Interval, Options
from lowdim.datasets._base import Param
from lowdim.datasets.checks import check_magnitude
from lowdim.errors import InputError

__all__ = ["PREPROCESS_PARAMS", "preprocess"]

PREPROCESS_PARAMS: dict[str, Param] = {
    "scale": Param(
        "none", (Options(("none", "standard", "robust", "minmax")),), "column scaling after log1p"
    ),
    "log1p": Param(False, (BOOL,), "replace each value x by log(1 + x) first"),
    "pca_first": Param(
        None, (NONE, Interval(int, 1, None)), "keep this many principal components last"
    ),
}


def preprocess(
    X: np.ndarray,
    spec: dict,
    where: str,
    columns: list[str],
    *,
    seed: int = 0,
    check_scale: bool = True,
) -> np.ndarray:
    """Apply the spec's ``log1p``, ``scale`` and ``pca_first`` to ``X`` (never in place).

    ``check_scale=False`` skips the magnitude check, for a look at the raw values of data that
    will be scaled before any method sees it.
    """
    if spec.get("log1p", False):
        too_small = X <= -1.0
        if too_small.any():
            row, col = (int(i) for i in np.argwhere(too_small)[0])
            raise InputError(
                f"{where}: `log1p = true` needs every value above -1, but column "
                f"{columns[col]!r} holds {float(X[row, col])!r} at data row {row + 1} "
                "(counting from 1); drop `log1p` or shift the data"
            )
        X = np.log1p(X)
    scale = spec.get("scale", "none")
    if scale == "standard":
        peak = np.max(np.abs(X), axis=0)
        X = X / np.where(peak > 0, peak, 1.0)
        spread = X.std(axis=0)
        X = (X - X.mean(axis=0)) / np.where(spread > 0, spread, 1.0)
    elif scale == "robust":
        low, middle, high = np.percentile(X, [25.0, 50.0, 75.0], axis=0)
        spread = high - low
        X = (X - middle) / np.where(spread > 0, spread, 1.0)
    elif scale == "minmax":
        low = X.min(axis=0)
        span = X.max(axis=0) - low
        X = (X - low) / np.where(span > 0, span, 1.0)
    if check_scale:
        check_magnitude(X, columns, where)
    n_keep = spec.get("pca_first")
    if n_keep is not None:
        limit = min(X.shape)
        if n_keep > limit:
            raise InputError(
                f"{where}: `pca_first = {n_keep}` asks for more components than the data has "
                f"(at most min(n_rows, n_columns) = {limit}); lower it"
            )
        from sklearn.decomposition import PCA

        X = PCA(n_components=n_keep, random_state=seed).fit_transform(X)
    return np.ascontiguousarray(X, dtype=np.float64)
