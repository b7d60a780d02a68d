"""Dataset specs: check one without loading anything, fill in defaults, and load it.

A spec names exactly one source: ``name`` (a generated family or a bundled set), ``file``
(the user's own data) or ``openml`` (an OpenML id or name, downloaded once and cached).
``label`` (the display name in a suite) is accepted everywhere and passed through untouched.
``seed`` is never filled in by :func:`validate_spec`: the runner puts the job's seed into a
spec that does not fix its own, and :func:`load` uses 0 when there is none.
"""

from __future__ import annotations

import dataclasses
import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from lowdim._validation import NONE, Instance, Interval, Options, Pattern, check_param
from lowdim.datasets import bundled, files, manifolds  # noqa: F401  (they register families)
from lowdim.datasets._base import Dataset, Param, get_family
from lowdim.datasets.checks import warn_data
from lowdim.datasets.preprocess import PREPROCESS_PARAMS, preprocess
from lowdim.datasets.tables import unusable_labels
from lowdim.errors import InputError, suggestion

__all__ = ["SOURCE_PARAMS", "validate_spec", "load", "describe", "subsample_rows"]


@dataclass(frozen=True)
class _ColumnList:
    """A list of distinct column names (or 0-based indexes, for arrays)."""

    def describe(self) -> str:
        return "a list of distinct column names (or 0-based column indexes for .npy/.npz)"

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        if not isinstance(value, list | tuple):
            return False
        ok = all(
            isinstance(v, str) or (isinstance(v, numbers.Integral) and not isinstance(v, bool))
            for v in value
        )
        return ok and len(set(value)) == len(value)


_STRING = Instance((str,), "a string")
_DELIMITER = Pattern(r"[^\n\r\"]", "a single character")
_COLUMNS = _ColumnList()
_SEED = Param(0, (Interval(int, 0, 2**32 - 1),), "random seed (the suite's by default)")
_SELECT = {
    "features": Param(None, (NONE, _COLUMNS), "use only these columns"),
    "drop": Param([], (_COLUMNS,), "leave out these columns"),
}
# A random subset of the rows, taken after loading, and columns carried along but never used
# as features; left out of the normalised spec when not given, so specs (and job ids) that do
# not use them are unchanged.
_SUBSAMPLE = {
    "subsample": Param(None, (NONE, Interval(int, 2, None)), "use a random subset of N rows"),
    "subsample_seed": Param(
        0, (Interval(int, 0, 2**32 - 1),), "seed of the subset (independent of `seed`)"
    ),
    "keep": Param(
        [], (_COLUMNS,), "carry these columns (ids) along in meta['kept'], never as features"
    ),
}

# The keys of a `file` or `openml` spec; a `name` spec takes its family's parameters.
SOURCE_PARAMS: dict[str, dict[str, Param]] = {
    "file": {
        "file": Param(None, (_STRING,), "path to a .csv, .tsv, .parquet, .npy or .npz file"),
        "labels": Param(
            None, (NONE, _STRING), "label column (CSV/TSV/Parquet) or array key (.npz)"
        ),
        **_SELECT,
        "delimiter": Param(
            None,
            (NONE, _DELIMITER),
            "CSV/TSV field delimiter (detected when not given)",
        ),
        "seed": _SEED,
        **PREPROCESS_PARAMS,
        **_SUBSAMPLE,
    },
    "openml": {
        "openml": Param(
            None, (Interval(int, 1, None), _STRING), "OpenML dataset id (an int) or name"
        ),
        "labels": Param(None, (NONE, _STRING), "label column (default: the dataset's target)"),
        **_SELECT,
        "cache": Param(
            None, (NONE, _STRING), "cache folder (default: $LOWDIM_CACHE or ~/.cache/lowdim)"
        ),
        "seed": _SEED,
        **PREPROCESS_PARAMS,
    },
}

_SOURCES = ("name", "file", "openml")


def _ordinal(where: str) -> str:
    return f"{where}: " if where else ""


def _normalised(value: Any, param: Param) -> Any:
    # TOML gives 0 for 0.0 and users write "Standard": make equal specs equal, for stable ids.
    for form in param.allowed:
        if not form.accepts(value, {}):
            continue
        if isinstance(form, Interval):
            return int(value) if form.kind is int else float(value)
        if isinstance(form, Options):
            return value.lower()
        if isinstance(form, Pattern) and form is not _DELIMITER:
            return value.lower()
        if isinstance(form, _ColumnList):
            return [v if isinstance(v, str) else int(v) for v in value]
        return value
    return value


def _params_for(spec: Mapping, where: str) -> tuple[str, str, dict[str, Param], Any]:
    present = [key for key in _SOURCES if key in spec]
    if len(present) != 1:
        found = f"got {', '.join(f'`{k}`' for k in present)}" if present else "got none"
        hint = suggestion(next(iter(spec), ""), _SOURCES) if not present and spec else ""
        raise InputError(
            f"{_ordinal(where)}a dataset needs exactly one of `name`, `file` or `openml`, "
            f"{found}{hint}"
        )
    source = present[0]
    if source != "name":
        return source, source, SOURCE_PARAMS[source], None
    if not isinstance(spec["name"], str):
        raise InputError(f"{_ordinal(where)}`name` must be a string, got {spec['name']!r}")
    family = get_family(spec["name"], where=where)
    return source, family.name, {"seed": _SEED, **family.params}, family


def validate_spec(spec: dict, *, where: str = "") -> dict:
    """Check a dataset spec without loading data; return it normalised with defaults filled in.

    Parameters
    ----------
    spec : dict
        A suite's ``[[datasets]]`` table, e.g. ``{"name": "swiss_roll", "n": 800}``.
    where : str, default=""
        Names the spec in messages, e.g. ``"suites/quick.toml, the 2nd [[datasets]]"``.

    Returns
    -------
    dict
        The source key first, then every parameter (defaults filled in, numbers and option
        strings normalised), then ``label`` if given. ``seed`` appears only when given.

    Raises
    ------
    InputError
        For an unknown source, name or key (with the closest valid name) or a bad value.
    """
    if not isinstance(spec, Mapping):
        raise InputError(f"{_ordinal(where)}a dataset spec must be a table, got {spec!r}")
    source, owner, params, family = _params_for(spec, where)
    allowed = set(params) | {"name", "label"} if source == "name" else set(params) | {"label"}
    for key in spec:
        if key not in allowed:
            raise InputError(
                f"{_ordinal(where)}unknown key `{key}` for dataset {owner!r}"
                f"{suggestion(key, sorted(allowed))}; its keys are {', '.join(sorted(allowed))}"
            )
    if "label" in spec and not isinstance(spec["label"], str):
        raise InputError(f"{_ordinal(where)}`label` must be a string, got {spec['label']!r}")
    out: dict[str, Any] = {"name": owner} if source == "name" else {}
    for key, param in params.items():
        if key in spec:
            try:
                check_param(owner, key, spec[key], list(param.allowed), {})
            except InputError as exc:
                raise InputError(f"{_ordinal(where)}{exc}") from None
            out[key] = _normalised(spec[key], param)
        elif key != "seed" and key not in _SUBSAMPLE:
            default = param.default
            out[key] = list(default) if isinstance(default, list) else default
    if family is not None and family.check is not None:
        family.check(out, where)
    if source == "file":
        kind = files.file_format(out["file"], where)
        if kind == "npy" and out["labels"] is not None:
            raise InputError(
                f"{_ordinal(where)}a .npy file holds one array, so `labels` cannot name a "
                "column; save X and labels together with numpy.savez(path, X=..., labels=...)"
            )
        if kind in ("npy", "npz") and any(
            isinstance(c, str)
            for c in (out["features"] or []) + out["drop"] + list(out.get("keep") or [])
        ):
            raise InputError(
                f"{_ordinal(where)}the columns of a .{kind} array have no names: give "
                "`features` and `drop` as 0-based column indexes"
            )
    if "label" in spec:
        out["label"] = spec["label"]
    return out


def load(spec: dict, *, check_scale: bool = True) -> Dataset:
    """Load the dataset a spec describes (``label``, if present, is ignored).

    ``check_scale=False`` lets a file's values beyond the magnitude limits through (see
    :func:`lowdim.datasets.checks.check_magnitude`): for a first look at raw columns that the
    methods will only see scaled.

    Returns
    -------
    Dataset
        ``X`` float64 (n x D), ``labels``, ``truth`` and ``meta`` (``meta["parameters"]`` is
        the normalised spec).
    """
    params = validate_spec(spec)
    params.pop("label", None)
    if "file" in params:
        return _subsample(files.load_file(params, check_scale=check_scale), params)
    if "openml" in params:
        return bundled.load_openml(params)
    family = get_family(params["name"])
    dataset = family.build(params)
    if family.kind == "generated" and _preprocessing_asked(params):
        columns = [str(i) for i in range(dataset.X.shape[1])]
        X = preprocess(
            dataset.X, params, f"the dataset {family.name!r}", columns, seed=params.get("seed", 0)
        )
        dataset = dataclasses.replace(dataset, X=X)
    return dataset


def subsample_rows(n: int, size: int, seed: int) -> np.ndarray:
    """The rows a ``subsample = size`` spec keeps of ``n`` rows with ``subsample_seed = seed``:
    ``size`` distinct rows drawn at random, in file order."""
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(n, size, replace=False))


def _subsample(dataset: Dataset, params: dict) -> Dataset:
    """Keep ``params["subsample"]`` random rows (in file order), or all when there are fewer."""
    size = params.get("subsample")
    if size is None or size >= dataset.n_samples:
        return dataset
    rows = subsample_rows(dataset.n_samples, size, params.get("subsample_seed", 0))
    meta = {**dataset.meta, "subsample_rows": size, "rows_in_file": dataset.n_samples}
    if meta.get("kept"):
        meta["kept"] = {k: [v[i] for i in rows] for k, v in meta["kept"].items()}
    labels = None if dataset.labels is None else dataset.labels[rows]
    if labels is not None:
        names = np.asarray(meta.get("classes") or np.unique(labels), dtype=object)
        where = f"the file {str(params['file'])!r}, subsample of {size} rows"
        unused = unusable_labels(names[labels], meta.get("label_column"), where)
        if unused:
            meta["warnings"] = list(meta.get("warnings", []))
            warn_data(unused, meta["warnings"])
            meta["labels_unused"] = unused
            labels = None
    return dataclasses.replace(
        dataset,
        X=np.ascontiguousarray(dataset.X[rows]),
        labels=labels,
        truth=None if dataset.truth is None else dataset.truth[rows],
        meta=meta,
    )


def _preprocessing_asked(params: dict) -> bool:
    return any(params.get(key, p.default) != p.default for key, p in PREPROCESS_PARAMS.items())


def describe(name: str) -> dict:
    """What ``lowdim datasets`` shows for ``name`` (a registered name, ``file`` or ``openml``).

    Returns
    -------
    dict
        ``name``, ``kind``, ``summary``, ``source``, ``citation``, ``parameters`` (name ->
        default) and ``help`` (name -> one line).
    """
    if name in SOURCE_PARAMS:
        params = SOURCE_PARAMS[name]
        summary = {
            "file": "your own data: CSV / TSV (delimiter detected), Parquet, NPY, NPZ",
            "openml": "an OpenML dataset by id or name, downloaded once and cached",
        }[name]
        source = "your file" if name == "file" else "OpenML (openml.org), cached on disk"
        citation = None if name == "file" else bundled._OPENML_CITATION
        kind = name
    else:
        family = get_family(name)
        params = {"seed": _SEED, **family.params}
        name, kind, summary = family.name, family.kind, family.summary
        source, citation = family.source, family.citation
    return {
        "name": name,
        "kind": kind,
        "summary": summary,
        "source": source,
        "citation": citation,
        "parameters": {key: p.default for key, p in params.items() if key != name},
        "help": {key: p.help for key, p in params.items() if key != name},
    }
