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
    "warn_data",
    "check_row_count",
    "check_unique_names",
    "numeric_matrix",
    "check_finite",
    "check_magnitude",
    "drop_constant_columns",
    "count_duplicates",
    "LARGEST_MAGNITUDE",
    "SMALLEST_MAGNITUDE",
]

_SHOWN = 3  # positions quoted in a message
# Squares of values beyond about 1.3e154 overflow float64 (largest 1.8e308) and squares below
# about 1.5e-154 fall under its smallest normal number (2.2e-308); distances, kernels and sums
# of squares over many rows and columns need a wide margin more, so data whose largest
# magnitude lies outside [1e-100, 1e100] is refused (a rough limit, not a sharp one).
LARGEST_MAGNITUDE = 1e100
SMALLEST_MAGNITUDE = 1e-100


class DataWarning(UserWarning):
    """Data that can be used but may mislead: duplicate rows, dropped constant columns."""


def warn_data(message: str, notes: list[str]) -> None:
    """Issue a :class:`DataWarning` and keep its message in ``notes``."""
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


def check_unique_names(names: list, where: str) -> None:
    """Refuse a table whose header gives two columns the same name.

    A reader that renamed the twins (``depth``, ``depth.1``) would let ``drop`` or ``labels``
    pick one of them while the other stays in, so the file must be fixed instead. Empty names
    are left alone (readers number them).
    """
    seen: dict[str, list[int]] = {}
    for position, name in enumerate(names, start=1):
        if str(name).strip():
            seen.setdefault(str(name), []).append(position)
    twins = {name: where_ for name, where_ in seen.items() if len(where_) > 1}
    if twins:
        shown = "; ".join(
            f"{name!r} (columns {', '.join(map(str, cols[:-1]))} and {cols[-1]})"
            for name, cols in twins.items()
        )
        raise InputError(
            f"{where} has duplicated column names: {shown}; give each column its own name "
            "in the header, so that `labels`, `features` and `drop` pick exactly one"
        )


def _not_numbers(values: pd.Series) -> str | None:
    """What a column holds when it cannot stand for numbers, as a phrase, or None."""
    dtype = values.dtype
    if isinstance(dtype, pd.DatetimeTZDtype) or pd.api.types.is_datetime64_any_dtype(dtype):
        return f"dates and times ({dtype})"
    if pd.api.types.is_timedelta64_dtype(dtype):
        return f"time spans ({dtype})"
    if isinstance(dtype, pd.PeriodDtype):
        return f"periods ({dtype})"
    if isinstance(dtype, pd.IntervalDtype):
        return f"intervals ({dtype})"
    if isinstance(dtype, pd.CategoricalDtype):
        return "categories (a categorical column)"
    if pd.api.types.is_object_dtype(dtype):
        kinds = {type(v).__name__ for v in values.dropna().iloc[:1000]}
        odd = sorted(kinds - {"str", "int", "float", "bool", "Decimal"})
        if odd:
            return f"values of type {', '.join(odd)}"
    return None


def numeric_matrix(frame: pd.DataFrame, where: str, notes: list[str] | None = None) -> np.ndarray:
    """The frame's values as float64, or an error naming the first column that is not numbers.

    Dates, time spans, periods, intervals, categories and objects such as lists are refused,
    never turned into their internal integers (a date would become nanoseconds). True / false
    columns are read as 1 / 0, and a :class:`DataWarning` says so (kept in ``notes``).
    """
    plain = [
        pd.api.types.is_float_dtype(d) or pd.api.types.is_integer_dtype(d) for d in frame.dtypes
    ]
    if all(plain):  # ordinary numbers throughout: nothing to refuse or to say, one conversion
        return np.ascontiguousarray(frame.to_numpy(dtype=np.float64, na_value=np.nan))
    converted = {}
    booleans = []
    for column in frame.columns:
        values = frame[column]
        kind = _not_numbers(values)
        if kind is not None:
            example = " (for a date, e.g. hours since a starting time)" if "time" in kind else ""
            raise InputError(
                f"{where}: column {column!r} holds {kind}, not numbers; list it in `drop` "
                "(--drop on the command line) or pass it as `labels`, or convert it to numbers "
                f"yourself{example}"
            )
        if pd.api.types.is_bool_dtype(values):
            booleans.append(column)
            continue
        if pd.api.types.is_numeric_dtype(values):
            continue
        coerced = pd.to_numeric(values, errors="coerce")
        bad = coerced.isna().to_numpy() & values.notna().to_numpy()
        if bad.any():
            row = int(np.argmax(bad))
            raise InputError(
                f"{where}: column {column!r} holds text where numbers are expected, first "
                f"{values.iloc[row]!r} at data row {row + 1} (counting from 1, header not "
                "counted); fix the value, or pass the column as the labels (--labels on the "
                "command line, `labels` in a suite) or drop it (--drop, `drop`)"
            )
        converted[column] = coerced
    if booleans and notes is not None:
        warn_data(
            f"{where}: column(s) {_names([str(c) for c in booleans])} hold true / false; "
            "they are read as 1 / 0",
            notes,
        )
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


def check_magnitude(X: np.ndarray, columns: list[str], where: str) -> None:
    """Refuse values whose squares leave the range of float64 (see ``LARGEST_MAGNITUDE``).

    Every method and criterion works with squared distances; with values near 1e300 they
    overflow to infinity, near 1e-300 they vanish to 0, and the failure would surface deep in
    a solver. Scaling the columns first (``scale = "standard"`` or ``"minmax"``) fixes both.
    """
    if X.size == 0:
        return
    peaks = np.max(np.abs(X), axis=0)
    largest = float(peaks.max())
    fix = (
        'scale the data first: `scale = "standard"` in a suite\'s dataset table, '
        "--scale standard on the command line, or divide the columns by a common factor"
    )
    if largest > LARGEST_MAGNITUDE:
        column = columns[int(np.argmax(peaks))]
        raise InputError(
            f"{where}: values reach {largest:.3g} in magnitude (column {column!r}); their "
            "squares overflow double precision (largest about 1.8e308), so distances and "
            f"kernels cannot be computed; {fix}"
        )
    if 0.0 < largest < SMALLEST_MAGNITUDE:
        raise InputError(
            f"{where}: every value is below {largest:.3g} in magnitude; their squares fall "
            "under the smallest normal double (about 2.2e-308), so distances collapse to 0; "
            f"{fix}"
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
        warn_data(
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
        warn_data(
            f"{where} has {n_duplicates} duplicate row(s) (the first at data row {first + 1}, "
            "rows counted from 1); neighbour graphs and rank-based criteria treat tied points "
            "arbitrarily, so consider removing them",
            notes,
        )
    return n_duplicates
