"""A fit on a subsample, extended to every row with the method's own transform."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.decomposition import PCA

from lowdim.datasets import subsample_rows
from lowdim.errors import InputError
from lowdim.run.extend import ExtendFromSample


def test_pca_fitted_on_the_rows_and_extended_equals_scikit_learn():
    # sklearn.decomposition.PCA fitted on the same rows, then transform on every row: the same
    # projection up to each component's sign.
    X = np.random.default_rng(0).normal(size=(200, 5)) * [5, 3, 1, 0.5, 0.1]
    ours = ExtendFromSample("pca", rows=120, row_seed=3).fit_transform(X)
    rows = subsample_rows(200, 120, 3)
    ref = PCA(n_components=2).fit(X[rows]).transform(X)
    signs = np.sign(np.sum(ours * ref, axis=0))
    np.testing.assert_allclose(ours * signs, ref, atol=1e-8)


def test_the_rows_are_the_resample_of_the_same_seed():
    X = np.random.default_rng(1).normal(size=(50, 3))
    model = ExtendFromSample("kernel_pca", params={"bandwidth": "median"}, rows=30).fit(X)
    np.testing.assert_array_equal(model.rows_, subsample_rows(50, 30, 0))
    # on its own training rows the extension reproduces the fit (exact for kernel PCA's
    # centred out-of-sample formula, Scholkopf et al. 1998)
    np.testing.assert_allclose(
        model.embedding_[model.rows_], model.estimator_.embedding_, atol=1e-8
    )


def test_a_method_without_transform_is_refused(monkeypatch):
    import lowdim.methods as registry

    class NoTransform:
        def __init__(self, **params):
            pass

        def get_params(self, deep=False):
            return {}

    monkeypatch.setattr(registry, "get_method", lambda name: NoTransform)
    with pytest.raises(InputError, match="no out-of-sample transform"):
        ExtendFromSample("no_transform").fit(np.zeros((10, 2)))
