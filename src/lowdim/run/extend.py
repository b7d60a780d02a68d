"""A fit on a subsample, extended to every row: what a comparison's confirmation measures.

:class:`ExtendFromSample` fits a registered method on the rows a ``subsample`` spec would keep
(:func:`lowdim.datasets.subsample_rows`, the same draw as the comparison's resample with that
seed) and embeds every row with the fitted method's own out-of-sample ``transform``
(Nyström where the method needs it). Set beside the same method fitted on all rows, the
Procrustes disparity of the two embeddings says how far a verdict reached on subsamples
carries to the whole file.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin

from lowdim.errors import InputError

__all__ = ["ExtendFromSample"]


class ExtendFromSample(TransformerMixin, BaseEstimator):
    """Fit ``method`` on ``rows`` random rows, then embed every row with its ``transform``.

    Parameters
    ----------
    method : str
        A registered method name (``lowdim methods``).
    params : dict, default=None
        The method's parameters.
    rows : int, default=100
        Rows to fit on.
    row_seed : int, default=0
        Seed of the draw of the rows, as a ``subsample_seed``.
    n_components : int, default=2
    random_state : int or None, default=None
        Passed to the method when it takes one.

    Attributes
    ----------
    estimator_ : estimator
        The method fitted on the rows.
    rows_ : ndarray
        The rows it was fitted on.
    embedding_ : ndarray of shape (n_samples, n_components)
        Every row, embedded by ``estimator_.transform``.
    """

    def __init__(
        self,
        method: str = "pca",
        *,
        params: dict | None = None,
        rows: int = 100,
        row_seed: int = 0,
        n_components: int = 2,
        random_state: Any = None,
    ) -> None:
        self.method = method
        self.params = params
        self.rows = rows
        self.row_seed = row_seed
        self.n_components = n_components
        self.random_state = random_state

    def fit(self, X: Any, y: Any = None) -> ExtendFromSample:
        from lowdim.datasets import subsample_rows
        from lowdim.methods import get_method, has_transform

        X = np.asarray(X, dtype=np.float64)
        cls = get_method(self.method)
        if not has_transform(cls):
            raise InputError(f"{self.method} has no out-of-sample transform to extend a fit with")
        params = dict(self.params or {})
        known = cls().get_params(deep=False)
        if "n_components" in known:
            params.setdefault("n_components", self.n_components)
        if "random_state" in known:
            params.setdefault("random_state", self.random_state)
        size = min(int(self.rows), X.shape[0])
        self.rows_ = subsample_rows(X.shape[0], size, int(self.row_seed))
        self.estimator_ = cls(**params).fit(X[self.rows_])
        self.embedding_ = np.asarray(self.estimator_.transform(X), dtype=np.float64)
        self.n_features_in_ = X.shape[1]
        return self

    def fit_transform(self, X: Any, y: Any = None) -> np.ndarray:
        return self.fit(X).embedding_

    def transform(self, X: Any) -> np.ndarray:
        return np.asarray(self.estimator_.transform(np.asarray(X, dtype=np.float64)))
