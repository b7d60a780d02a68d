"""The parts of the suite check that look past the TOML: method classes, files and memory.

:mod:`lowdim.run.suites` calls these before any job exists, so that a mistake every job would
hit is one line naming the file, the table and the key, and nothing runs:

- an imported class must be a transformer the runner can drive (``fit_transform``, and
  ``get_params`` to fill in ``n_components`` and ``random_state``), built with the table's
  parameters, which its ``__init__`` signature must accept;
- a data file's ``labels``, ``features`` and ``drop`` must name columns its header has
  (:func:`lowdim.datasets.files.check_file_columns`, which reads the header only);
- the memory a dataset's size needs (:mod:`lowdim.run.memory_needs`) must fit in the suite's
  ``memory_limit``.
"""

from __future__ import annotations

import inspect
from typing import Any

from lowdim.errors import InputError, suggestion
from lowdim.run.memory_needs import format_bytes, memory_need

__all__ = [
    "transformer_problem",
    "method_defaults",
    "check_construction",
    "file_size",
    "check_memory",
]


def transformer_problem(cls: type) -> str | None:
    """Why ``cls`` cannot be run as a method, as a phrase, or None."""
    has = {name: callable(getattr(cls, name, None)) for name in ("fit", "transform")}
    has["fit_transform"] = callable(getattr(cls, "fit_transform", None))
    if has["fit_transform"]:
        return None
    if has["fit"] and has["transform"]:
        return (
            "has fit and transform but no fit_transform, which the runner calls; derive the "
            "class from sklearn.base.TransformerMixin"
        )
    if has["fit"]:
        return (
            "is not a transformer: it has fit but neither transform nor fit_transform (a "
            "predictor or a clusterer?); name a class that maps data to coordinates"
        )
    return "is not an estimator class: it has no fit / fit_transform"


def _signature_params(cls: type) -> dict[str, Any] | None:
    """``__init__``'s keyword parameters and defaults (``inspect.Parameter.empty`` for none);
    None when it takes ``**kwargs``, so any name may be valid."""
    try:
        signature = inspect.signature(cls.__init__)
    except (TypeError, ValueError):
        return None
    out = {}
    for name, param in list(signature.parameters.items())[1:]:
        if param.kind is param.VAR_KEYWORD:
            return None
        if param.kind is not param.VAR_POSITIONAL:
            out[name] = param.default
    return out


def method_defaults(cls: Any, target: str, key: str, where: str, given: list[str]) -> dict:
    """Check that ``cls`` can be run with parameters named ``given``; return its defaults.

    The parameter names come from ``get_params()`` of a default instance, or, when the class
    cannot be built without arguments, from its ``__init__`` signature (then every parameter
    without a default must be among ``given``).
    """
    if not isinstance(cls, type):
        raise InputError(
            f"{where}: `{key} = {target!r}` is not a class but a {type(cls).__name__}; name "
            "an estimator class"
        )
    problem = transformer_problem(cls)
    if problem:
        raise InputError(f"{where}: `{key} = {target!r}` {problem}")
    if not callable(getattr(cls, "get_params", None)):
        raise InputError(
            f"{where}: `{key} = {target!r}` has no get_params, which the runner needs to set "
            "n_components and random_state; derive it from sklearn.base.BaseEstimator"
        )
    try:
        defaults = cls().get_params(deep=False)
    except Exception as exc:
        defaults = _signature_params(cls)
        if defaults is None:
            raise InputError(
                f"{where}: `{target}` cannot be built with its default parameters "
                f"({type(exc).__name__}: {' '.join(str(exc).split())}); it must be a "
                "scikit-learn compatible estimator"
            ) from None
    for param in given:
        if param not in defaults:
            raise InputError(
                f"{where}: unknown parameter `{param}` of {target}"
                f"{suggestion(param, defaults)}; its parameters are " + ", ".join(defaults)
            )
    required = [p for p, v in defaults.items() if v is inspect.Parameter.empty]
    missing = [p for p in required if p not in given]
    if missing:
        raise InputError(
            f"{where}: {target} needs `{missing[0]}` (it has no default); set it in the table"
        )
    return defaults


def check_construction(cls: type, target: str, where: str, params: dict) -> None:
    """Build ``cls(**params)`` as the runner will, and read its parameters back."""
    try:
        cls(**params).get_params(deep=False)
    except Exception as exc:
        shown = ", ".join(f"{k}={v!r}" for k, v in params.items()) or "no parameters"
        raise InputError(
            f"{where}: {target} cannot be built with {shown} ({type(exc).__name__}: "
            f"{' '.join(str(exc).split())}); check the parameters against its documentation"
        ) from None


def file_size(spec: dict, where: str) -> tuple[int | None, int | None]:
    """Check a file spec's columns against the file's header; return (rows, feature columns)
    as the job will load them (None where the header does not say)."""
    from lowdim.datasets.files import check_file_columns

    shape = check_file_columns(spec, where)
    rows = shape.n_rows
    if rows is not None and spec.get("subsample") is not None:
        rows = min(rows, int(spec["subsample"]))
    columns = shape.n_columns
    if spec.get("features") is not None:
        columns = len(spec["features"])
    elif columns is not None:
        columns -= len(set(spec.get("drop") or []) | set(spec.get("keep") or []))
        if shape.columns is not None and spec.get("labels") is not None:
            columns -= 1  # a table's label column is not a feature
    return rows, columns


def _generated_size(spec: dict) -> tuple[int | None, int | None]:
    if "name" not in spec or "n" not in spec:
        return None, None
    return int(spec["n"]), int(spec.get("ambient_dim") or spec.get("dim") or 3)


def check_memory(datasets: list, methods: list, limit: int | None) -> None:
    """Refuse the first (dataset, method) pair whose estimated memory exceeds ``limit``.

    ``datasets`` and ``methods`` are the suite's entries; a dataset entry's ``size`` is its
    (rows, columns) when known.
    """
    if limit is None:
        return
    from lowdim.methods import get_method

    defaults: dict[str, dict] = {}
    for data in datasets:
        n, d = data.size if data.size is not None else _generated_size(data.spec)
        if n is None or d is None:
            continue
        for method in methods:
            name = method.spec.get("name")
            if name is not None and name not in defaults:
                defaults[name] = get_method(name)().get_params(deep=False)
            params = {**defaults.get(name, {}), **method.spec}
            need = memory_need(name, params, n, d)
            if need.nbytes > limit:
                table = data.where.rpartition(": ")[2]
                raise InputError(
                    f"{method.where} ({method.label}) on {table} ({data.label}, n = {n}, "
                    f"D = {d}): {need.what} needs about {format_bytes(need.nbytes)}, more "
                    f"than `memory_limit` = {format_bytes(limit)} in [suite]; raise "
                    f"`memory_limit`, lower `n`, or {need.remedy}"
                )
