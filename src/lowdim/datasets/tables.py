"""From a table read off disk (or out of a package) to a checked :class:`Dataset`.

Shared by user files, bundled real data and OpenML downloads: pick the label and feature
columns, refuse text, missing values and infinities, drop constant columns, count duplicate
rows, encode labels as integer codes, then apply the spec's preprocessing.

A label column that cannot tell methods apart is not used: when every value is missing, or
when every row has the same class (then each method would score a perfect neighbour vote).
The Dataset then has no labels, so the criteria that need them are skipped, and a
:class:`~lowdim.datasets.checks.DataWarning` says why (kept in ``meta["warnings"]``). A label
column with only some values missing is refused.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from lowdim.datasets._base import Dataset
from lowdim.datasets.checks import (
    check_finite,
    check_row_count,
    check_unique_names,
    count_duplicates,
    drop_constant_columns,
    warn_data,
)
from lowdim.datasets.preprocess import preprocess
from lowdim.errors import InputError, suggestion

__all__ = ["split_frame", "kept_columns", "encode_labels", "unusable_labels", "assemble"]


def _columns_text(columns: Sequence) -> str:
    shown = ", ".join(repr(c) for c in list(columns)[:20])
    return shown + (f" and {len(columns) - 20} more" if len(columns) > 20 else "")


def _require(names: Sequence, available: Sequence, key: str, where: str) -> None:
    for name in names:
        if name not in available:
            hint = suggestion(str(name), [str(c) for c in available])
            raise InputError(
                f"{where} has no column {name!r} (named in `{key}`){hint}; its columns are "
                f"{_columns_text(available)}"
            )


def split_frame(
    frame: pd.DataFrame, spec: dict, where: str
) -> tuple[pd.DataFrame, pd.Series | None]:
    """The feature columns and the label column named by ``labels``, ``features``, ``drop``;
    ``keep`` columns are never features (read them with :func:`kept_columns`).

    Works on the header alone (a frame with no rows), as the suite check uses it.
    """
    columns = list(frame.columns)
    check_unique_names(columns, where)
    label_name = spec.get("labels")
    if label_name is not None:
        _require([label_name], columns, "labels", where)
    features = spec.get("features")
    keep = list(spec.get("keep") or [])
    _require(keep, columns, "keep", where)
    drop = list(spec.get("drop") or [])
    _require(drop, columns, "drop", where)
    clash = [c for c in keep if c in (features or []) or c == label_name]
    if clash:
        raise InputError(
            f"{where}: the column {clash[0]!r} is named in `keep` and as a feature or the label; "
            "a kept column is carried along and never used"
        )
    drop += keep
    if features is not None:
        _require(features, columns, "features", where)
        if label_name in features:
            raise InputError(
                f"{where}: the column {label_name!r} is named both in `labels` and in "
                "`features`; a label column cannot also be a feature"
            )
        chosen = [c for c in features if c not in drop]
    else:
        chosen = [c for c in columns if c != label_name and c not in drop]
    if not chosen:
        raise InputError(
            f"{where}: no feature columns are left after `labels`, `features` and `drop`; "
            f"its columns are {_columns_text(columns)}"
        )
    labels = frame[label_name] if label_name is not None else None
    return frame[chosen], labels


def kept_columns(frame: pd.DataFrame, spec: dict) -> dict[str, list]:
    """The values of the spec's ``keep`` columns, as plain lists in row order."""
    return {str(c): frame[c].tolist() for c in spec.get("keep") or []}


def encode_labels(values, label_name: str | None, where: str) -> tuple[np.ndarray | None, list]:
    """Integer codes 0..k-1 in sorted order of the class values, and those values."""
    if values is None:
        return None, []
    series = pd.Series(np.asarray(values).ravel())
    missing = series.isna().to_numpy()
    if missing.any():
        column = f"column {label_name!r}" if label_name else "labels"
        raise InputError(
            f"{where}: the label {column} has {int(missing.sum())} missing values (first at "
            f"data row {int(np.argmax(missing)) + 1}, counting from 1); fill them in or drop "
            "those rows"
        )
    codes, classes = pd.factorize(series, sort=True)
    return codes.astype(np.int64), [c.item() if hasattr(c, "item") else c for c in classes]


def unusable_labels(values, label_name: str | None, where: str) -> str | None:
    """Why a label column cannot be used (all missing, or a single class), or None."""
    if values is None:
        return None
    series = pd.Series(np.asarray(values).ravel())
    column = f"the label column {label_name!r}" if label_name else "the label array"
    skipped = "it is not used, and the criteria that need labels are skipped"
    if len(series) and series.isna().all():
        return f"{where}: {column} is empty (all {len(series)} values are missing); {skipped}"
    distinct = series.dropna().unique()
    if len(distinct) == 1 and not series.isna().any():
        value = distinct[0].item() if hasattr(distinct[0], "item") else distinct[0]
        return (
            f"{where}: {column} holds a single class ({value!r}) in all {len(series)} rows, "
            f"so it cannot tell methods apart; {skipped}"
        )
    return None


def assemble(
    name: str,
    X: np.ndarray,
    columns: list[str],
    *,
    spec: dict,
    where: str,
    meta: dict,
    labels=None,
    label_name: str | None = None,
    truth: np.ndarray | None = None,
    warn: bool = True,
    check_scale: bool = True,
) -> Dataset:
    """Check ``X`` (n x D numbers), encode the labels, preprocess, and build the Dataset."""
    check_row_count(X.shape[0], where)
    check_finite(X, columns, where)
    notes: list[str] = list(meta.get("warnings", []))
    X, columns, dropped = drop_constant_columns(X, columns, where, notes, warn=warn)
    n_duplicates = count_duplicates(X, where, notes, warn=warn)
    unused = unusable_labels(labels, label_name, where)
    if unused:
        warn_data(unused, notes)
        # The single class (if any) is kept in meta, so an output can still show the column.
        _, classes = encode_labels(pd.Series(np.asarray(labels).ravel()).dropna(), None, where)
        codes = None
    else:
        codes, classes = encode_labels(labels, label_name, where)
    if truth is not None:
        truth = np.asarray(truth, dtype=np.float64)
        if truth.ndim == 1:
            truth = truth[:, None]
        if truth.shape[0] != X.shape[0]:
            raise InputError(
                f"{where}: `truth` has {truth.shape[0]} rows but the data has {X.shape[0]}; "
                "they must match row for row"
            )
    X = preprocess(X, spec, where, columns, seed=spec.get("seed", 0), check_scale=check_scale)
    meta = {
        **meta,
        "parameters": dict(spec),
        "columns": [str(c) for c in columns],
        "dropped_columns": [str(c) for c in dropped],
        "n_duplicates": n_duplicates,
        "warnings": notes,
        "classes": classes,
        "label_column": label_name,
        "labels_unused": unused,
    }
    return Dataset(name, X, codes, truth, meta)
