"""``lowdim embed``: one embedding of the user's file by one method, written as CSV or NPY.

``--set key=value`` values are read as int, float, bool, None or string, then checked the way
a suite's method table is: an unknown parameter suggests the closest name, each value is
checked against the method's ``_param_specs``, and the method's own fit-time checks follow.
The output is written to a temporary name in the same folder and renamed, so a failure at any
step leaves nothing behind. ``--quality [K]`` adds each point's Q_NX(K), trustworthiness and
continuity terms (:func:`lowdim.metrics.per_point_quality`) as columns of a CSV output.
"""

from __future__ import annotations

import argparse
import re
import sys
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from lowdim._files import atomic_path
from lowdim.cli.paths import check_out_file_folder
from lowdim.errors import InputError, suggestion
from lowdim.run.compare import file_spec

HELP = "embed one data file with one method and write the coordinates as CSV or NPY"

OUTPUT_FORMATS = (".csv", ".npy")
DEFAULT_QUALITY_K = 10


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="the data: CSV, TSV, Parquet, NPY or NPZ")
    parser.add_argument(
        "--method", required=True, metavar="NAME", help="a method from `lowdim methods`"
    )
    parser.add_argument(
        "--set",
        action="append",
        default=[],
        metavar="KEY=VALUE",
        dest="settings",
        help="a parameter of the method, e.g. --set n_neighbors=15 (repeatable)",
    )
    parser.add_argument(
        "--n-components", type=int, default=None, metavar="N", help="output dimensions (2)"
    )
    parser.add_argument(
        "--labels", metavar="COL", help="a label column: left out of the data, kept in a CSV"
    )
    parser.add_argument(
        "--drop", action="append", default=[], metavar="COL", help="a column to leave out"
    )
    parser.add_argument(
        "--features",
        action="append",
        default=[],
        metavar="COL",
        help="a column to use as a feature (repeatable; default: every other numeric column)",
    )
    parser.add_argument(
        "--keep",
        action="append",
        default=[],
        metavar="COL",
        help="a column (an id) copied into the CSV output row for row, never used as a feature",
    )
    parser.add_argument("--log1p", action="store_true", help="replace each value x by log(1 + x)")
    parser.add_argument(
        "--scale",
        choices=("none", "standard", "robust", "minmax"),
        default="none",
        help="column scaling after log1p (default: none)",
    )
    parser.add_argument(
        "--pca-first", type=int, metavar="N", help="keep the first N principal components"
    )
    parser.add_argument(
        "--out", required=True, metavar="OUT", help="where to write: a .csv or .npy file"
    )
    parser.add_argument(
        "--quality",
        nargs="?",
        const=DEFAULT_QUALITY_K,
        default=None,
        type=int,
        metavar="K",
        help="add each point's qnx@K, trustworthiness@K and continuity@K columns to the CSV "
        f"(K = {DEFAULT_QUALITY_K} when not given; their means are the global criteria)",
    )


def parse_value(text: str) -> Any:
    """Read a command-line value as int, float, bool, None or, failing those, a string."""
    lowered = text.strip().lower()
    if lowered in ("true", "false"):
        return lowered == "true"
    if lowered in ("none", "null"):
        return None
    if re.fullmatch(r"[+-]?\d+", lowered):
        return int(lowered)
    try:
        return float(lowered)
    except ValueError:
        return text.strip()


def parse_settings(items: list[str]) -> dict[str, Any]:
    """``["n_neighbors=15", "weights=heat"]`` -> ``{"n_neighbors": 15, "weights": "heat"}``."""
    out: dict[str, Any] = {}
    for item in items:
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep or not key:
            raise InputError(f"--set {item!r} must look like key=value, e.g. --set n_neighbors=15")
        if key in out:
            raise InputError(f"--set gives `{key}` twice; keep one value")
        out[key] = parse_value(value)
    return out


def configure_method(name: str, params: dict[str, Any]) -> Any:
    """An unfitted estimator ``name`` with ``params``, each checked before any data is read.

    ``random_state`` is fixed to 0 where the method has one and it was not given, so the
    same command gives the same embedding.
    """
    from lowdim._validation import check_param
    from lowdim.methods import get_method

    cls = get_method(name)
    defaults = cls().get_params(deep=False)
    for key in params:
        if key not in defaults:
            raise InputError(
                f"unknown parameter `{key}` of {name}{suggestion(key, defaults)}; its "
                "parameters are " + ", ".join(defaults)
            )
    specs = getattr(cls, "_param_specs", {})
    for key, value in params.items():
        if key in specs:
            check_param(cls.__name__, key, value, specs[key], {})
    if "random_state" in defaults and "random_state" not in params:
        params = {**params, "random_state": 0}
    return cls(**params)


def _check_output(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix not in OUTPUT_FORMATS:
        raise InputError(
            f"--out {str(path)!r} must end in .csv or .npy (the format follows the extension)"
        )
    check_out_file_folder(path)
    if path.is_dir():
        raise InputError(f"--out {str(path)!r} is a folder; give a file name ending in {suffix}")
    return suffix


def _label_values(dataset: Any) -> np.ndarray | None:
    labels = dataset.labels
    classes = dataset.meta.get("classes") or []
    if labels is None and dataset.meta.get("labels_unused") and len(classes) == 1:
        # One class is not used for scoring, but the column still belongs in the output.
        return np.full(dataset.n_samples, classes[0], dtype=object)
    if labels is None:
        return None
    classes = dataset.meta.get("classes")
    if classes is not None:
        return np.asarray(classes, dtype=object)[np.asarray(labels, dtype=int)]
    return np.asarray(labels)


def write_embedding(
    path: Path,
    Y: np.ndarray,
    labels: np.ndarray | None = None,
    label_name: str | None = None,
    extra: dict[str, np.ndarray] | None = None,
    leading: dict[str, list] | None = None,
) -> None:
    """Write ``Y`` to ``path`` (CSV with ``dim1, dim2, ...`` or NPY) atomically, mode 0644.

    ``leading`` columns (the ``--keep`` ids) come first in a CSV, so the rows can be joined
    back to the file's; ``extra`` columns (name -> one value per row, NaN written as an empty
    cell) follow the coordinates and the labels.
    """
    with atomic_path(path) as temporary, open(temporary, "wb") as fh:
        if path.suffix.lower() == ".npy":
            np.save(fh, Y)
        else:
            import pandas as pd

            frame = pd.DataFrame(Y, columns=[f"dim{i + 1}" for i in range(Y.shape[1])])
            for position, (name, values) in enumerate((leading or {}).items()):
                frame.insert(position, name, values)
            if labels is not None:
                frame[label_name or "label"] = labels
            for name, values in (extra or {}).items():
                frame[name] = values
            frame.to_csv(fh, index=False, lineterminator="\n")


def _fit(estimator: Any, name: str, X: np.ndarray) -> Any:
    """``fit_transform``; a plugin method's own ValueError is its verdict on the user's data
    or settings (lowdim's built-ins raise InputError themselves)."""
    from lowdim.methods import method_origin

    origin = method_origin(name)
    try:
        return estimator.fit_transform(X)
    except InputError:
        raise
    except ValueError as exc:
        if origin.startswith("lowdim.methods."):
            raise
        raise InputError(
            f"the method {name} ({origin}) refused the data or its settings: "
            f"{' '.join(str(exc).split())}"
        ) from None


def _warn(caught: list[warnings.WarningMessage]) -> None:
    for w in caught:
        print(f"lowdim: warning: {' '.join(str(w.message).split())}", file=sys.stderr)


def _check_quality(k: int | None, suffix: str) -> None:
    if k is None:
        return
    if suffix != ".csv":
        raise InputError(
            "--quality adds per-point columns, which only a .csv output holds; write to a "
            ".csv file or leave out --quality"
        )
    if k < 1:
        raise InputError(f"--quality K must be a positive number of neighbours, got {k}")


def _quality_columns(X: np.ndarray, Y: np.ndarray, k: int) -> dict[str, np.ndarray]:
    from lowdim.metrics import per_point_quality

    n = X.shape[0]
    if k > (n - 1) // 2:
        raise InputError(
            f"--quality {k} needs fewer than half the {n} rows as neighbours (trustworthiness "
            f"and continuity need K < n/2); give --quality {max(1, (n - 1) // 2)} or less"
        )
    quality = per_point_quality(X, Y, ks=k)
    for note in quality.notes:
        print(f"lowdim: note: {note}; the other rows' quality cells are empty", file=sys.stderr)
    return quality.columns()


def run(args: argparse.Namespace) -> int:
    from lowdim import datasets
    from lowdim.datasets.headers import check_readable

    out = Path(args.out)
    _check_quality(args.quality, _check_output(out))
    params = parse_settings(args.settings)
    if args.n_components is not None:
        if params.get("n_components", args.n_components) != args.n_components:
            raise InputError(
                "--n-components and --set n_components disagree; give the number once"
            )
        params["n_components"] = args.n_components
    estimator = configure_method(args.method, params)
    try:
        check_readable(args.file, f"the data file {args.file!r}")
    except FileNotFoundError:
        raise InputError(
            f"data file {args.file!r} not found; give the path to a data file"
        ) from None
    if args.pca_first is not None and args.pca_first < 1:
        raise InputError(
            f"--pca-first must be a positive number of components, got {args.pca_first}"
        )
    if args.keep and out.suffix.lower() == ".npy":
        raise InputError(
            "--keep copies columns into the output, which only a .csv output holds; write to a "
            ".csv file or leave out --keep"
        )
    spec = file_spec(
        args.file,
        labels=args.labels,
        features=args.features,
        drop=args.drop,
        keep=args.keep,
        scale=args.scale,
        log1p=args.log1p,
        pca_first=args.pca_first,
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        dataset = datasets.load(spec)
        Y = np.asarray(_fit(estimator, args.method, dataset.X), dtype=np.float64)
    _warn(caught)
    if Y.ndim != 2 or Y.shape[0] != dataset.n_samples or not np.isfinite(Y).all():
        raise InputError(
            f"the method {args.method} returned an embedding of shape {Y.shape} with "
            f"{int(np.size(Y) - np.isfinite(Y).sum())} non-finite values for "
            f"{dataset.n_samples} rows; try other parameters"
        )
    extra = None if args.quality is None else _quality_columns(dataset.X, Y, args.quality)
    kept = dataset.meta.get("kept") or None
    write_embedding(out, Y, _label_values(dataset), args.labels, extra, kept)
    if args.labels and out.suffix.lower() == ".npy":
        print(
            f"lowdim: note: a .npy file holds the coordinates only; the labels {args.labels!r} "
            "are kept in a .csv output",
            file=sys.stderr,
        )
    print(
        f"wrote the {Y.shape[0]} x {Y.shape[1]} embedding of {args.file} by {args.method} to {out}"
    )
    return 0
