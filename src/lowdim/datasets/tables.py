"""From a table read off disk (or out of a package) to a checked :class:`Dataset`.

Shared by user files, bundled real data and OpenML downloads: pick the label and feature
columns, refuse text, missing values and infinities, drop constant columns, count duplicate
rows, encode labels as integer codes, then apply the spec's preprocessing.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from lowdim.datasets._base import Dataset
from lowdim.datasets.checks import (
    check_finite,
    check_row_count,
    count_duplicates,
    drop_constant_columns,
)
from lowdim.datasets.preprocess import preprocess
from lowdim.errors import InputError, suggestion

__all__ = ["split_frame", "encode_labels", "assemble"]


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
    """The feature columns and the label column named by ``labels``, ``features``, ``drop``."""
    columns = list(frame.columns)
    label_name = spec.get("labels")
    if label_name is not None:
        _require([label_name], columns, "labels", where)
    features = spec.get("features")
    drop = list(spec.get("drop") or [])
    _require(drop, columns, "drop", where)
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
) -> Dataset:
    """Check ``X`` (n x D numbers), encode the labels, preprocess, and build the Dataset."""
    check_row_count(X.shape[0], where)
    check_finite(X, columns, where)
    notes: list[str] = list(meta.get("warnings", []))
    X, columns, dropped = drop_constant_columns(X, columns, where, notes, warn=warn)
    n_duplicates = count_duplicates(X, where, notes, warn=warn)
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
    X = preprocess(X, spec, where, columns, seed=spec.get("seed", 0))
    meta = {
        **meta,
        "parameters": dict(spec),
        "columns": [str(c) for c in columns],
        "dropped_columns": [str(c) for c in dropped],
        "n_duplicates": n_duplicates,
        "warnings": notes,
        "classes": classes,
        "label_column": label_name,
    }
    return Dataset(name, X, codes, truth, meta)
