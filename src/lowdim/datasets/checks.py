"""Worded checks of loaded data: each problem is caught here, where it first appears.

Every function takes ``where``, a phrase naming the data for the user (``"the file
data/cells.csv"``), and raises :class:`~lowdim.errors.InputError` with one sentence: what is
wrong, where, how to fix it. Rows are counted from 1 over the data rows (a header line is not
counted), and the messages say so.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd

from lowdim.errors import InputError

__all__ = [
    "DataWarning",
    "check_row_count",
    "numeric_matrix",
    "check_finite",
    "drop_constant_columns",
    "count_duplicates",
]

_SHOWN = 3  # positions quoted in a message


class DataWarning(UserWarning):
    """Data that can be used but may mislead: duplicate rows, dropped constant columns."""


def _warn(message: str, notes: list[str]) -> None:
    warnings.warn(message, DataWarning, stacklevel=4)
    notes.append(message)


def check_row_count(n_rows: int, where: str, *, header: bool = False) -> None:
    """Refuse data with no rows, or with a single row (no neighbours, no spread)."""
    if n_rows == 0:
        what = "has a header line but no data rows" if header else "has no data rows"
        raise InputError(f"{where} {what}; add at least two rows of data")
    if n_rows == 1:
        raise InputError(
            f"{where} has only one data row; dimensionality reduction needs at least two rows"
        )


def numeric_matrix(frame: pd.DataFrame, where: str) -> np.ndarray:
    """The frame's values as float64, or an error naming the first column holding text."""
    converted = {}
    for column in frame.columns:
        values = frame[column]
        if pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
            continue
        coerced = pd.to_numeric(values, errors="coerce")
        bad = coerced.isna().to_numpy() & values.notna().to_numpy()
        if bad.any():
            row = int(np.argmax(bad))
            raise InputError(
                f"{where}: column {column!r} holds text where numbers are expected, first "
                f"{values.iloc[row]!r} at data row {row + 1} (counting from 1, header not "
                "counted); fix the value, or pass the column as `labels` or list it in `drop`"
            )
        converted[column] = coerced
    if converted:
        frame = frame.copy()
        for column, values in converted.items():
            frame[column] = values
    return np.ascontiguousarray(frame.to_numpy(dtype=np.float64, na_value=np.nan))


def _positions(mask: np.ndarray, columns: list[str]) -> str:
    # np.nonzero walks row by row, so the first positions are the first in reading order.
    rows, cols = np.nonzero(mask)
    shown = [
        f"row {r + 1} column {columns[c]!r}"
        for r, c in zip(rows[:_SHOWN], cols[:_SHOWN], strict=True)
    ]
    more = ", ..." if rows.size > _SHOWN else ""
    return ", ".join(shown) + more


def check_finite(X: np.ndarray, columns: list[str], where: str) -> None:
    """Refuse missing values and infinities, saying how many and where the first are."""
    finite = np.isfinite(X)
    if finite.all():
        return
    missing = np.isnan(X)
    if missing.any():
        raise InputError(
            f"{where} has {int(missing.sum())} missing values (first at data "
            f"{_positions(missing, columns)}, rows counted from 1); fill them in or remove "
            "those rows"
        )
    infinite = ~finite
    raise InputError(
        f"{where} has {int(infinite.sum())} infinite values (first at data "
        f"{_positions(infinite, columns)}, rows counted from 1); replace them with finite "
        "numbers or remove those rows"
    )


def drop_constant_columns(
    X: np.ndarray, columns: list[str], where: str, notes: list[str], *, warn: bool = True
) -> tuple[np.ndarray, list[str], list[str]]:
    """Drop columns that hold one value; error if nothing is left.

    Returns the remaining matrix, its column names and the dropped names. With ``warn`` a
    :class:`DataWarning` names them (and the message is appended to ``notes``).
    """
    constant = np.ptp(X, axis=0) == 0
    if not constant.any():
        return X, columns, []
    dropped = [c for c, flag in zip(columns, constant, strict=True) if flag]
    if constant.all():
        raise InputError(
            f"{where}: every column is constant ({_names(dropped)}), so there is nothing to "
            "reduce; check that the right columns were read"
        )
    if warn:
        _warn(
            f"{where}: dropped {len(dropped)} constant column(s) ({_names(dropped)}); they "
            "carry no information",
            notes,
        )
    kept = [c for c, flag in zip(columns, constant, strict=True) if not flag]
    return np.ascontiguousarray(X[:, ~constant]), kept, dropped


def _names(columns: list[str]) -> str:
    shown = ", ".join(repr(c) for c in columns[:5])
    return shown + (f" and {len(columns) - 5} more" if len(columns) > 5 else "")


def _duplicated(X: np.ndarray) -> np.ndarray:
    """True for each row equal to an earlier row.

    Rows are hashed by their bit patterns in a few vectorised passes (wrapping uint64
    arithmetic), and only rows whose hashes collide are compared exactly, so the common case of
    no duplicates costs far less than hashing whole rows as tuples.
    """
    bits = np.ascontiguousarray(X, dtype=np.float64).view(np.uint64)
    negative_zero = np.uint64(1 << 63)  # the bits of -0.0, which equals 0.0 as a number
    # Odd random weights per column: the hash is a wrapping weighted sum of mixed bit patterns.
    weights = np.random.default_rng(0).integers(1, 2**62, size=bits.shape[1], dtype=np.uint64)
    weights |= np.uint64(1)
    row_hash = np.empty(X.shape[0], dtype=np.uint64)
    for start in range(0, X.shape[0], 8192):  # blocks that stay in cache
        block = bits[start : start + 8192]
        block = np.where(block == negative_zero, np.uint64(0), block)
        mixed = (block ^ (block >> np.uint64(29))) * weights
        row_hash[start : start + 8192] = mixed.sum(axis=1, dtype=np.uint64)
    candidates = np.flatnonzero(pd.Series(row_hash).duplicated(keep=False).to_numpy())
    duplicated = np.zeros(X.shape[0], dtype=bool)
    if candidates.size:
        # An earlier equal row has the same hash, so it is among the candidates too.
        duplicated[candidates] = pd.DataFrame(X[candidates]).duplicated().to_numpy()
    return duplicated


def count_duplicates(X: np.ndarray, where: str, notes: list[str], *, warn: bool = True) -> int:
    """Count rows equal to an earlier row; warn, since neighbour ranks then tie arbitrarily."""
    duplicated = _duplicated(X)
    n_duplicates = int(duplicated.sum())
    if n_duplicates and warn:
        first = int(np.argmax(duplicated))
        _warn(
            f"{where} has {n_duplicates} duplicate row(s) (the first at data row {first + 1}, "
            "rows counted from 1); neighbour graphs and rank-based criteria treat tied points "
            "arbitrarily, so consider removing them",
            notes,
        )
    return n_duplicates
