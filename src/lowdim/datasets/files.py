"""The user's own files: CSV / TSV (delimiter detected), Parquet, NPY (memory-mapped), NPZ.

Text tables are parsed by pandas' C parser in one call (no Python loop over rows), so a
200,000 x 50 CSV loads in a few seconds. The sha256 of the file's bytes goes into
``meta["content_hash"]``.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd

from lowdim.datasets._base import Dataset
from lowdim.datasets.checks import check_row_count, numeric_matrix
from lowdim.datasets.headers import (
    Outline,
    check_readable,
    not_utf8,
    numbered_columns,
    outline,
    parquet_columns,
    text_header,
)
from lowdim.datasets.tables import assemble, kept_columns, split_frame
from lowdim.errors import InputError

__all__ = ["FORMATS", "file_format", "content_hash", "load_file", "check_file_columns"]

FORMATS: dict[str, str] = {
    ".csv": "csv",
    ".tsv": "tsv",
    ".tab": "tsv",
    ".txt": "csv",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".npy": "npy",
    ".npz": "npz",
}


def file_format(path: str | Path, where: str = "") -> str:
    """The format named by the file's extension, or an InputError listing the known ones."""
    suffix = Path(path).suffix.lower()
    if suffix in FORMATS:
        return FORMATS[suffix]
    prefix = f"{where}: " if where else ""
    raise InputError(
        f"{prefix}cannot tell the format of {str(path)!r} from its extension "
        f"{suffix or '(none)'!r}; use one of {', '.join(FORMATS)}"
    )


def content_hash(path: str | Path) -> str:
    """sha256 of the file's bytes, as hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _read_text(path: Path, kind: str, where: str, delimiter: str | None) -> pd.DataFrame:
    sep, names = text_header(path, kind, where, delimiter)
    try:
        frame = pd.read_csv(
            path,
            sep=sep,
            header=None if names is None else 0,
            engine="c",
            encoding="utf-8",
            low_memory=False,
        )
    except UnicodeDecodeError as exc:
        raise InputError(not_utf8(where, exc)) from None
    except pd.errors.ParserError as exc:
        raise InputError(
            f"{where} could not be parsed with delimiter {sep!r}: {' '.join(str(exc).split())}"
            "; check that every row has the same number of fields"
        ) from None
    except pd.errors.EmptyDataError:
        raise InputError(
            f"{where} is empty; give a file with a header line and data rows"
        ) from None
    if names is None:
        frame.columns = numbered_columns(frame.shape[1])
    check_row_count(len(frame), where, header=names is not None)
    return frame


def _read_parquet(path: Path, where: str) -> pd.DataFrame:
    parquet_columns(path, where)  # pyarrow present, a Parquet footer, no duplicated names
    try:
        frame = pd.read_parquet(path)
    except Exception as exc:  # pyarrow raises its own error types for a bad file
        raise InputError(
            f"{where} could not be read as Parquet ({type(exc).__name__}: "
            f"{' '.join(str(exc).split())}); check that it is a Parquet file"
        ) from None
    check_row_count(len(frame), where)
    return frame


def _numeric_array(array: np.ndarray, what: str, where: str) -> np.ndarray:
    if array.dtype.names is not None or not (
        np.issubdtype(array.dtype, np.number) or array.dtype == bool
    ):
        raise InputError(
            f"{where}: {what} holds {array.dtype} values, not numbers; save a numeric array"
        )
    if np.iscomplexobj(array):
        raise InputError(f"{where}: {what} holds complex numbers; save real values")
    if array.ndim != 2:
        raise InputError(
            f"{where}: {what} is a {array.ndim}-D array of shape {array.shape}; save a 2-D "
            "array (rows = samples, columns = features), e.g. X.reshape(-1, 1) for one feature"
        )
    return array


def _select_array_columns(X: np.ndarray, spec: dict, where: str) -> tuple[np.ndarray, list]:
    n_columns = X.shape[1]
    chosen = list(range(n_columns)) if spec.get("features") is None else spec["features"]
    drop = set(spec.get("drop") or [])
    for key, indexes in (("features", chosen), ("drop", drop)):
        for index in indexes:
            if not isinstance(index, int) or not 0 <= index < n_columns:
                raise InputError(
                    f"{where}: `{key}` names column {index!r}, but an array's columns are "
                    f"given by 0-based index, here 0 to {n_columns - 1}"
                )
    chosen = [i for i in chosen if i not in drop]
    if not chosen:
        raise InputError(f"{where}: no columns are left after `features` and `drop`")
    if chosen != list(range(n_columns)):
        X = X[:, chosen]
    return X, [str(i) for i in chosen]


def _load_npy(path: Path, spec: dict, where: str, meta: dict, check_scale: bool) -> Dataset:
    try:
        array = np.load(path, mmap_mode="r", allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise InputError(
            f"{where} is not a readable .npy array ({' '.join(str(exc).split())}); save it with "
            "numpy.save"
        ) from None
    array = _numeric_array(array, "the array", where)
    check_row_count(array.shape[0], where)
    meta["memory_mapped"] = True
    X, columns = _select_array_columns(np.asarray(array, dtype=np.float64), spec, where)
    return assemble(
        path.stem, X, columns, spec=spec, where=where, meta=meta, check_scale=check_scale
    )


def _member(archive, key: str, where: str) -> np.ndarray:
    try:
        return archive[key]
    except ValueError as exc:  # numpy refuses object arrays without pickle, and bad headers
        if "allow_pickle" in str(exc):
            raise InputError(
                f"{where}: the array {key!r} holds Python objects, which lowdim does not "
                "unpickle; save it with a plain dtype, e.g. labels.astype(str)"
            ) from None
        raise InputError(
            f"{where}: the array {key!r} cannot be read ({' '.join(str(exc).split())}); save "
            "it again with numpy.savez"
        ) from None


def _load_npz(path: Path, spec: dict, where: str, meta: dict, check_scale: bool) -> Dataset:
    try:
        archive = np.load(path, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise InputError(
            f"{where} is not a readable .npz archive ({' '.join(str(exc).split())}); save it "
            "with numpy.savez"
        ) from None
    with archive:
        keys = list(archive.keys())
        if "X" not in keys:
            raise InputError(
                f"{where} has no array 'X' (its keys are {', '.join(map(repr, keys))}); save the "
                "data as numpy.savez(path, X=..., labels=..., truth=...)"
            )
        X = _numeric_array(_member(archive, "X", where), "the array 'X'", where)
        check_row_count(X.shape[0], where)
        label_key = spec.get("labels") or ("labels" if "labels" in keys else None)
        if label_key is not None and label_key not in keys:
            raise InputError(
                f"{where} has no array {label_key!r} (named in `labels`); its keys are "
                f"{', '.join(map(repr, keys))}"
            )
        labels = _member(archive, label_key, where) if label_key is not None else None
        truth = _member(archive, "truth", where) if "truth" in keys else None
    if labels is not None and len(labels) != X.shape[0]:
        raise InputError(
            f"{where}: the labels {label_key!r} have {len(labels)} entries but 'X' has "
            f"{X.shape[0]} rows; they must match row for row"
        )
    X, columns = _select_array_columns(np.asarray(X, dtype=np.float64), spec, where)
    return assemble(
        path.stem,
        X,
        columns,
        spec=spec,
        where=where,
        meta=meta,
        labels=labels,
        label_name=label_key,
        truth=truth,
        check_scale=check_scale,
    )


def load_file(spec: dict, *, check_scale: bool = True) -> Dataset:
    """Load the file named by ``spec["file"]`` with the spec's options (``check_scale``: see
    :func:`lowdim.datasets.preprocess.preprocess`)."""
    path = Path(spec["file"]).expanduser()
    where = f"the file {str(path)!r}"
    check_readable(path, where)
    kind = file_format(path)
    if path.stat().st_size == 0:
        raise InputError(f"{where} is empty; give a file with data rows")
    meta = {
        "source": "file",
        "path": str(path),
        "format": kind,
        "content_hash": content_hash(path),
        "citation": None,
    }
    if kind == "npy":
        return _load_npy(path, spec, where, meta, check_scale)
    if kind == "npz":
        return _load_npz(path, spec, where, meta, check_scale)
    if kind == "parquet":
        frame = _read_parquet(path, where)
    else:
        frame = _read_text(path, kind, where, spec.get("delimiter"))
    features, labels = split_frame(frame, spec, where)
    meta["kept"] = kept_columns(frame, spec)
    meta["warnings"] = []
    X = numeric_matrix(features, where, meta["warnings"])
    return assemble(
        path.stem,
        X,
        [str(c) for c in features.columns],
        spec=spec,
        where=where,
        meta=meta,
        labels=labels,
        label_name=spec.get("labels"),
        check_scale=check_scale,
    )


def check_file_columns(spec: dict, where: str) -> Outline:
    """Check a file spec's `labels`, `features` and `drop` against the file's header alone.

    ``spec`` is a normalised file spec; ``where`` names its place (a suite's table). The same
    rules as loading apply (:func:`~lowdim.datasets.tables.split_frame` on a frame with no
    rows), so a misspelled column fails here, before any job runs. Returns the file's
    :class:`~lowdim.datasets.headers.Outline` (its row count feeds the memory estimate).
    """
    path = Path(spec["file"]).expanduser()
    here = f"{where}: the file {str(path)!r}"
    kind = file_format(path, where)
    shape = outline(path, kind, here, spec.get("delimiter"))
    if shape.columns is not None:
        split_frame(pd.DataFrame(columns=shape.columns), spec, here)
        return shape
    if shape.n_columns is not None:
        _select_array_columns(np.empty((0, shape.n_columns)), spec, here)
    label_key = spec.get("labels")
    if kind == "npz" and label_key is not None and label_key not in (shape.keys or []):
        raise InputError(
            f"{here} has no array {label_key!r} (named in `labels`); its keys are "
            f"{', '.join(map(repr, shape.keys or []))}"
        )
    return shape
