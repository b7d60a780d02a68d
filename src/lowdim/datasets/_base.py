"""The :class:`Dataset` record and the registry of named datasets.

A named dataset (a generated family such as ``swiss_roll`` or a bundled real set such as
``iris``) is a :class:`Family`: its parameters declared once as data (default, allowed forms,
one line of help), where it comes from, and the function that builds it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from lowdim.errors import InputError, suggestion

__all__ = ["Dataset", "Param", "Family", "register", "get_family", "dataset_names"]


@dataclass(frozen=True)
class Dataset:
    """One dataset, ready for a method.

    Attributes
    ----------
    name : str
        The registry name (``swiss_roll``), the file's stem, or ``openml_<id>``.
    X : ndarray of shape (n, D), float64
        The data.
    labels : ndarray of shape (n,) or None
        Integer class codes (``meta["classes"]`` holds the original names where there are any).
    truth : ndarray of shape (n, d) or None
        The intrinsic coordinates a perfect method would recover (generated data only).
    meta : dict
        ``source``, ``parameters`` (the normalised spec), ``citation``; for files
        ``content_hash`` (sha256 of the file's bytes); ``n_duplicates``,
        ``dropped_columns`` and ``warnings`` (the messages of any warnings issued).
    """

    name: str
    X: np.ndarray
    labels: np.ndarray | None = None
    truth: np.ndarray | None = None
    meta: dict = field(default_factory=dict)

    @property
    def n_samples(self) -> int:
        return int(self.X.shape[0])

    @property
    def n_features(self) -> int:
        return int(self.X.shape[1])


@dataclass(frozen=True)
class Param:
    """A dataset parameter: its default, the forms it may take (``lowdim._validation``)."""

    default: Any
    allowed: tuple
    help: str


@dataclass(frozen=True)
class Family:
    """A named dataset: parameters, provenance and the function that builds it.

    ``build(params) -> Dataset`` receives the normalised spec (every parameter filled in).
    ``check(params, where)`` may test rules that tie parameters together; it raises
    InputError.
    """

    name: str
    kind: str  # "generated" or "bundled"
    summary: str
    source: str
    citation: str
    params: dict[str, Param]
    build: Callable[[dict], Dataset]
    check: Callable[[dict, str], None] | None = None


_REGISTRY: dict[str, Family] = {}


def register(family: Family) -> Family:
    """Add ``family`` to the registry; a taken name is refused naming both entries."""
    if family.name in _REGISTRY and _REGISTRY[family.name] is not family:
        old = _REGISTRY[family.name]
        raise InputError(
            f"cannot register the dataset {family.name!r} ({family.summary}): the name is "
            f"taken by {old.summary!r} from {old.source}; choose another name"
        )
    _REGISTRY[family.name] = family
    return family


def get_family(name: str, *, where: str = "") -> Family:
    """Return the registered family ``name`` or raise InputError suggesting the closest."""
    if isinstance(name, str) and name.lower() in _REGISTRY:
        return _REGISTRY[name.lower()]
    prefix = f"{where}: " if where else ""
    raise InputError(
        f"{prefix}unknown dataset {name!r}{suggestion(str(name), _REGISTRY)}; the known "
        f"datasets are {', '.join(sorted(_REGISTRY))} (or give `file = ...` for your own data)"
    )


def dataset_names() -> list[str]:
    """Names accepted by ``name = ...`` in a dataset spec, generated families first."""
    generated = sorted(n for n, f in _REGISTRY.items() if f.kind == "generated")
    other = sorted(n for n, f in _REGISTRY.items() if f.kind != "generated")
    return generated + other
