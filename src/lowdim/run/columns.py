"""What ``lowdim compare`` sees in a file's columns before it runs anything, in one line each.

A distance-based method weighs every column by its spread, so on sensor or lab data the unit
of the widest column picks the neighbours, the bandwidth and the verdict. Before a comparison
the columns are checked for spreads that differ more than ten-fold, non-negative skewed counts
(where log1p is the usual remedy), constant columns (dropped by the reader) and duplicate
columns (counted twice in every distance). Each finding says what was found and what was
done: nothing is changed silently, and nothing is changed that the user did not ask for.
"""

from __future__ import annotations

import numpy as np

__all__ = ["SPREAD_RATIO", "SKEWNESS", "column_findings"]

SPREAD_RATIO = 10.0
"""Columns whose standard deviations differ more than this many times are reported."""
SKEWNESS = 2.0
"""A non-negative whole-number column skewed beyond this looks like counts (common practice)."""


def _names(items: list[str], limit: int = 4) -> str:
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def _skewness(x: np.ndarray) -> float:
    centred = x - x.mean()
    sd = np.sqrt(np.mean(centred**2))
    return float(np.mean(centred**3) / sd**3) if sd > 0 else 0.0


def column_findings(
    X: np.ndarray,
    columns: list[str],
    *,
    dropped: list[str] = (),
    scale: str = "none",
    log1p: bool = False,
) -> list[str]:
    """One sentence per finding about the raw feature columns ``X`` (before preprocessing).

    Parameters
    ----------
    X : array of shape (n_samples, n_columns)
        The feature columns as read, constant ones already dropped.
    columns : list of str
        Their names.
    dropped : list of str
        Constant columns the reader dropped.
    scale, log1p :
        The preprocessing the user chose, so each sentence says what was done.
    """
    X = np.asarray(X, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore"):  # raw values may be near 1e300
        return _findings(X, columns, list(dropped), scale, log1p)


def _findings(
    X: np.ndarray, columns: list[str], dropped: list[str], scale: str, log1p: bool
) -> list[str]:
    out = []
    if len(dropped):
        out.append(
            f"{len(dropped)} constant column(s) carry no information and were left out: "
            f"{_names(list(dropped))}."
        )
    if X.shape[1] >= 2:
        sd = X.std(axis=0)
        positive = sd > 0
        if positive.sum() >= 2:
            widest, narrowest = (
                int(np.argmax(np.where(positive, sd, -np.inf))),
                int(np.argmin(np.where(positive, sd, np.inf))),
            )
            ratio = sd[widest] / sd[narrowest]
            if ratio > SPREAD_RATIO:
                what = (
                    "nothing was rescaled, so the widest columns dominate every distance: pass "
                    "--scale standard (or robust) to weigh the columns alike"
                    if scale == "none"
                    else f"--scale {scale} puts them on one footing before any distance"
                )
                out.append(
                    f"The columns differ in spread {ratio:,.0f}-fold ({columns[widest]} has "
                    f"standard deviation {sd[widest]:.4g}, {columns[narrowest]} "
                    f"{sd[narrowest]:.4g}); {what}."
                )
    counts = [
        name
        for j, name in enumerate(columns)
        if X[:, j].min() >= 0
        and np.all(X[:, j] == np.round(X[:, j]))
        and _skewness(X[:, j]) > SKEWNESS
    ]
    if counts:
        what = (
            "--log1p was applied"
            if log1p
            else "nothing was changed; consider --log1p, which compresses their long tails"
        )
        out.append(
            f"{len(counts)} column(s) look like skewed counts (non-negative whole numbers, "
            f"skewness above {SKEWNESS:g}): {_names(counts)}; {what}."
        )
    pairs = _duplicate_columns(X, columns)
    if pairs:
        shown = "; ".join(f"{a} and {b}" for a, b in pairs[:3])
        more = f" and {len(pairs) - 3} more pairs" if len(pairs) > 3 else ""
        out.append(
            f"Identical columns ({shown}{more}) count twice in every distance; nothing was "
            "dropped: pass --drop for one of each pair if they measure the same thing."
        )
    return out


def _duplicate_columns(X: np.ndarray, columns: list[str]) -> list[tuple[str, str]]:
    """Pairs of columns with identical values, found by hashing each column's bytes."""
    seen: dict[bytes, int] = {}
    pairs = []
    for j in range(X.shape[1]):
        key = np.ascontiguousarray(X[:, j]).tobytes()
        if key in seen:
            pairs.append((columns[seen[key]], columns[j]))
        else:
            seen[key] = j
    return pairs
