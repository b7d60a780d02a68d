"""The adapter every peer is: project checks around an outside estimator that does the work.

:class:`Peer` checks the data and the parameters with the project's wording, builds the
underlying estimator with the same parameters, fits it and keeps its ``embedding_`` (and the
estimator itself in ``estimator_``); :class:`OutOfSample` adds ``transform`` for the peers
whose underlying class has the method's own out-of-sample map.
"""

from __future__ import annotations

import importlib
import importlib.metadata
import importlib.util
import re
from typing import Any, ClassVar

from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_is_fitted

from lowdim._validation import (
    Interval,
    check_params,
    validate_input,
)
from lowdim.errors import InputError

__all__ = ["Peer", "OutOfSample", "N_NEIGHBORS"]

N_NEIGHBORS = [Interval(int, 1, "n_samples - 1")]


class Peer(TransformerMixin, BaseEstimator):
    """What every peer shares: checks, the underlying estimator, the facts about its cost."""

    # (module, class) of the implementation, and the distribution that installs it
    _underlying: ClassVar[tuple[str, str]]
    _package: ClassVar[str] = "scikit-learn"
    _install: ClassVar[str] = "pip install -U scikit-learn"
    _min_version: ClassVar[tuple[int, int] | None] = None
    # fitted attributes copied from the underlying estimator besides ``embedding_``
    _fitted: ClassVar[tuple[str, ...]] = ()
    _reference: ClassVar[str]
    compare_grid: ClassVar[dict[str, tuple]] = {}
    cost_tier: ClassVar[str] = "fast"

    @classmethod
    def min_neighbors(cls, n_components: int) -> int:
        """The smallest ``n_neighbors`` this method accepts for ``n_components``.

        The lower bound of its ``_param_specs``, unless a form's rule involves
        ``n_components`` (Hessian LLE, LTSA, modified LLE).
        """
        return int(cls._param_specs["n_neighbors"][0].low)

    @classmethod
    def unavailable(cls) -> str | None:
        """Why this peer cannot run here (missing or too old package, with the fix), or None."""
        module = cls._underlying[0]
        if importlib.util.find_spec(module.split(".")[0]) is None:
            return f"needs {cls._package}, which is not installed: {cls._install}"
        version = _version(cls._package)
        if cls._min_version and version and _release(version) < cls._min_version:
            wanted = ".".join(map(str, cls._min_version))
            return f"needs {cls._package} >= {wanted}, found {version}: {cls._install}"
        return None

    @classmethod
    def origin(cls) -> str:
        """Where the algorithm comes from: package, version and class, or how to install it."""
        module, name = cls._underlying
        if importlib.util.find_spec(module.split(".")[0]) is None:
            return f"{cls._package}, not installed: {cls._install}"
        target = f"{module}.{name}{cls._variant()}"
        text = f"{cls._package} {_version(cls._package) or '(version unknown)'}: {target}"
        reason = cls.unavailable()
        return f"{text}; {reason}" if reason else text

    @classmethod
    def _variant(cls) -> str:
        return ""

    def _underlying_params(self) -> dict:
        return self.get_params(deep=False)

    def _check_neighbours(self) -> None:
        """The check that involves two parameters (see ``min_neighbors``)."""
        n_neighbors = getattr(self, "n_neighbors", None)
        if n_neighbors is None:
            return
        low = self.min_neighbors(self.n_components)
        if n_neighbors < low:
            raise InputError(
                f"the parameter `n_neighbors` of `{type(self).__name__}` must be an int >= "
                f"{low} for n_components={self.n_components}, got {n_neighbors}"
            )

    def fit(self, X: Any, y: Any = None) -> Peer:
        """Fit the underlying estimator on ``X`` and keep its embedding.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : ignored

        Returns
        -------
        self
        """
        X = validate_input(self, X, reset=True)
        check_params(self, n_samples=X.shape[0], n_features=X.shape[1])
        self._check_neighbours()
        estimator = self._underlying_class()(**self._underlying_params())
        estimator.fit(X)
        self.estimator_ = estimator
        self.embedding_ = estimator.embedding_
        for name in self._fitted:
            setattr(self, name, getattr(estimator, name))
        return self

    def fit_transform(self, X: Any, y: Any = None) -> Any:
        """Fit on ``X`` and return ``embedding_``."""
        return self.fit(X).embedding_

    @classmethod
    def _underlying_class(cls) -> type:
        reason = cls.unavailable()
        if reason:
            raise InputError(f"`{cls.__name__}` {reason}")
        module, name = cls._underlying
        return getattr(importlib.import_module(module), name)


class OutOfSample:
    """``transform`` for the peers whose underlying class embeds new points."""

    def transform(self, X: Any) -> Any:
        """Embed new points with the underlying estimator's own ``transform``.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples, n_components)
        """
        check_is_fitted(self, "estimator_")
        X = validate_input(self, X, reset=False, min_samples=1)
        return self.estimator_.transform(X)


def _version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def _release(version: str) -> tuple[int, ...]:
    return tuple(int(part) for part in re.findall(r"\d+", version)[:2])
