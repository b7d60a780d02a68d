"""Parameter and data validation shared by the estimators.

Parameters are declared once, as data, in a class attribute ``_param_specs`` mapping each
parameter name to a list of allowed forms (:class:`Interval`, :class:`Options`,
:class:`Rule`, :data:`NONE`, ...). :func:`check_params` words every error the same way:

    the parameter `n_neighbors` of `LaplacianEigenmaps` must be an int in [1, n_samples - 1],
    got 0
"""

from __future__ import annotations

import numbers
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from lowdim.errors import InputError, suggestion

__all__ = [
    "Interval",
    "Options",
    "Pattern",
    "Instance",
    "NONE",
    "BOOL",
    "check_params",
    "check_param",
    "check_data",
    "validate_input",
    "largest_asymmetry",
    "check_symmetric",
    "RANDOM_STATE",
]


@dataclass(frozen=True)
class Interval:
    """A real or integer interval; ``"n_samples"``-style bounds are resolved at fit time.

    ``low``/``high`` may be numbers, None (unbounded) or a string naming a data-dependent bound
    (``"n_samples - 1"``, ``"n_samples"``, ``"n_features"``) that is checked only when the
    data size is known.
    """

    kind: type  # int or float
    low: float | str | None
    high: float | str | None
    closed: str = "both"  # "both", "left", "right", "neither"

    def describe(self) -> str:
        name = "an int" if self.kind is int else "a number"
        lo = "-inf" if self.low is None else str(self.low)
        hi = "inf" if self.high is None else str(self.high)
        left = "[" if self.closed in ("both", "left") and self.low is not None else "("
        right = "]" if self.closed in ("both", "right") and self.high is not None else ")"
        return f"{name} in {left}{lo}, {hi}{right}"

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        if isinstance(value, bool | np.bool_):
            return False
        if self.kind is int:
            if not isinstance(value, numbers.Integral):
                return False
        elif not isinstance(value, numbers.Real):
            return False
        value = float(value)
        if not np.isfinite(value):
            return False
        lo, hi = _resolve(self.low, sizes), _resolve(self.high, sizes)
        if lo is not None:
            if value < lo or (value == lo and self.closed in ("right", "neither")):
                return False
        if hi is not None:
            if value > hi or (value == hi and self.closed in ("left", "neither")):
                return False
        return True


def _resolve(bound: float | str | None, sizes: dict[str, int]) -> float | None:
    if bound is None or not isinstance(bound, str):
        return bound
    match = re.fullmatch(r"\s*(n_samples|n_features)\s*(?:([-+])\s*(\d+))?\s*", bound)
    if match is None:
        raise RuntimeError(f"bad bound {bound!r} in a parameter spec")
    base = sizes.get(match.group(1))
    if base is None:
        return None  # data size unknown yet: checked again at fit time
    offset = int(match.group(3) or 0)
    return base - offset if match.group(2) == "-" else base + offset


@dataclass(frozen=True)
class Options:
    """One of a set of strings (compared lower-cased)."""

    values: tuple[str, ...]

    def describe(self) -> str:
        return "one of " + ", ".join(repr(v) for v in self.values)

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        return isinstance(value, str) and value.lower() in self.values


@dataclass(frozen=True)
class Pattern:
    """A string matching a regular expression, e.g. ``local`` or ``local:K``."""

    regex: str
    text: str

    def describe(self) -> str:
        return self.text

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        return isinstance(value, str) and re.fullmatch(self.regex, value.lower()) is not None


@dataclass(frozen=True)
class Instance:
    """An instance of the given type(s), e.g. a RandomState or a callable."""

    types: tuple[type, ...]
    text: str

    def describe(self) -> str:
        return self.text

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        return isinstance(value, self.types)


@dataclass(frozen=True)
class _Literal:
    value: Any
    text: str

    def describe(self) -> str:
        return self.text

    def accepts(self, value: Any, sizes: dict[str, int]) -> bool:
        if self.value is None:
            return value is None
        return isinstance(value, bool | np.bool_)


NONE = _Literal(None, "None")
BOOL = _Literal(bool, "a bool")
RANDOM_STATE = [
    NONE,
    Interval(int, 0, 2**32 - 1),
    Instance((np.random.RandomState,), "a RandomState"),
]


def check_param(owner: str, name: str, value: Any, allowed: list, sizes: dict[str, int]) -> None:
    """Raise InputError unless ``value`` fits one of the ``allowed`` forms."""
    if any(form.accepts(value, sizes) for form in allowed):
        return
    text = [form.describe() for form in allowed]
    rule = text[0] if len(text) == 1 else ", ".join(text[:-1]) + " or " + text[-1]
    hint = ""
    if isinstance(value, str):
        choices = [v for form in allowed if isinstance(form, Options) for v in form.values]
        hint = suggestion(value, choices)
    raise InputError(f"the parameter `{name}` of `{owner}` must be {rule}, got {value!r}{hint}")


def check_params(
    estimator: Any, *, n_samples: int | None = None, n_features: int | None = None
) -> None:
    """Check every parameter of ``estimator`` against its class's ``_param_specs``."""
    specs = getattr(type(estimator), "_param_specs", {})
    sizes = {}
    if n_samples is not None:
        sizes["n_samples"] = n_samples
    if n_features is not None:
        sizes["n_features"] = n_features
    owner = type(estimator).__name__
    for name, allowed in specs.items():
        check_param(owner, name, getattr(estimator, name), allowed, sizes)


def check_data(X: Any, owner: str, *, min_samples: int = 2, name: str = "X") -> np.ndarray:
    """Return ``X`` as a C-contiguous float64 2-D array, or raise a worded InputError.

    Refuses sparse input, complex or non-numeric values, 1-D or >2-D arrays, NaN/inf and fewer
    than ``min_samples`` rows.
    """
    if hasattr(X, "toarray") or hasattr(X, "tocsr"):
        raise TypeError(
            f"`{owner}` does not accept sparse input for `{name}`; pass a dense array "
            "(for example X.toarray())"
        )
    # array-likes go through __array__ first: some refuse numpy's array-function protocol
    if np.iscomplexobj(np.asarray(X) if hasattr(X, "__array__") else X):
        raise InputError(f"Complex data not supported: `{name}` given to `{owner}` is complex")
    try:
        arr = np.asarray(X, dtype=np.float64)
    except ValueError as exc:
        raise InputError(f"`{name}` given to `{owner}` must hold numbers only: {exc}") from None
    if arr.ndim != 2:
        raise InputError(
            f"`{name}` given to `{owner}` must be a 2-D array (samples x features), "
            f"got {arr.ndim}-D with shape {arr.shape}. Reshape your data with "
            "X.reshape(-1, 1) for one feature or X.reshape(1, -1) for one sample"
        )
    n = arr.shape[0]
    if n < min_samples:
        raise InputError(
            f"`{owner}` needs at least {min_samples} samples in `{name}`, got n_samples={n}"
        )
    if arr.shape[1] < 1:
        raise InputError(
            f"`{name}` given to `{owner}` has no features: 0 feature(s) "
            f"(shape=({arr.shape[0]}, 0)) while a minimum of 1 is required."
        )
    # A finite sum proves every entry finite at a fraction of an element-wise pass; only a
    # non-finite sum (NaN, inf, or an overflow of huge finite values) needs the full look.
    with np.errstate(over="ignore", invalid="ignore"):
        total = np.sum(arr)
    if not np.isfinite(total) and not np.isfinite(arr).all():
        bad = np.argwhere(~np.isfinite(arr))
        row, col = bad[0]
        raise InputError(
            f"`{name}` given to `{owner}` contains NaN or infinity ({len(bad)} values, first "
            f"at row {row}, column {col}); remove or impute them first"
        )
    return np.ascontiguousarray(arr)


def validate_input(
    estimator: Any, X: Any, *, reset: bool, min_samples: int = 2, name: str = "X"
) -> np.ndarray:
    """Check ``X`` with worded messages, then record/compare ``n_features_in_``.

    Use ``reset=True`` in ``fit`` and ``reset=False`` (with ``min_samples=1``) in ``transform``;
    the scikit-learn bookkeeping (``n_features_in_``, ``feature_names_in_``, the message for a
    wrong number of features) comes from ``sklearn.utils.validation.validate_data``.
    """
    from sklearn.utils.validation import validate_data

    owner = type(estimator).__name__
    arr = check_data(X, owner, min_samples=min_samples, name=name)
    # validate_data sees the original object so that DataFrame column names are recorded.
    validate_data(
        estimator,
        X if hasattr(X, "columns") else arr,
        reset=reset,
        dtype=np.float64,
        ensure_all_finite=False,  # checked above, with the position of the first bad value
    )
    return arr


def largest_asymmetry(A: np.ndarray, *, tile: int = 256) -> tuple[float, int, int]:
    """The largest |A[i, j] - A[j, i]| of a square matrix and where it is (i < j).

    Compares square tiles above the diagonal with their mirror tiles, each small enough for
    the cache: ``np.abs(A - A.T)`` at once walks ``A.T`` column-wise and is many times slower.
    """
    n = A.shape[0]
    worst, where = 0.0, (0, 0)
    for r in range(0, n, tile):
        for c in range(r, n, tile):
            gap = np.abs(A[r : r + tile, c : c + tile] - A[c : c + tile, r : r + tile].T)
            if gap.size and (top := float(gap.max())) > worst:
                i, j = np.unravel_index(int(np.argmax(gap)), gap.shape)
                worst, where = top, (r + int(i), c + int(j))
    return worst, where[0], where[1]


def check_symmetric(A: np.ndarray, owner: str, parameter: str) -> None:
    """Raise InputError unless the precomputed square matrix ``A`` is symmetric (to 1e-8)."""
    scale = float(np.max(np.abs(A))) if A.size else 0.0
    gap, i, j = largest_asymmetry(A)
    if gap > 1e-8 * max(scale, 1.0):
        raise InputError(
            f"the parameter `{parameter}` of `{owner}` is 'precomputed', so `X` must be "
            f"symmetric, but X[{i}, {j}] = {A[i, j]:.6g} and X[{j}, {i}] = {A[j, i]:.6g}; "
            "symmetrise it, e.g. (X + X.T) / 2"
        )
