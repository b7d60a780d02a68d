"""Preprocessing from the spec, against scikit-learn's scalers and PCA."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from sklearn.decomposition import PCA
from sklearn.preprocessing import MinMaxScaler, RobustScaler, StandardScaler

from lowdim.datasets import load
from lowdim.datasets.preprocess import preprocess
from lowdim.errors import InputError

X = np.random.default_rng(0).gamma(2.0, 3.0, size=(60, 5))
COLUMNS = [f"c{i}" for i in range(5)]


def test_standard_scaling_matches_standard_scaler():
    # sklearn.preprocessing.StandardScaler (population sd, ddof = 0).
    ours = preprocess(X, {"scale": "standard"}, "here", COLUMNS)
    assert_allclose(ours, StandardScaler().fit_transform(X))


def test_minmax_scaling_matches_minmax_scaler():
    # sklearn.preprocessing.MinMaxScaler, default range [0, 1].
    assert_allclose(
        preprocess(X, {"scale": "minmax"}, "here", COLUMNS), MinMaxScaler().fit_transform(X)
    )


def test_robust_scaling_matches_robust_scaler():
    # sklearn.preprocessing.RobustScaler: median removed, divided by the 25-75 % range.
    assert_allclose(
        preprocess(X, {"scale": "robust"}, "here", COLUMNS), RobustScaler().fit_transform(X)
    )


def test_log1p_comes_before_scaling():
    ours = preprocess(X, {"log1p": True, "scale": "standard"}, "here", COLUMNS)
    assert_allclose(ours, StandardScaler().fit_transform(np.log1p(X)))


def test_pca_first_matches_pca_up_to_column_signs():
    # sklearn.decomposition.PCA: the same scores, each component up to its sign.
    ours = preprocess(X, {"pca_first": 3}, "here", COLUMNS)
    ref = PCA(n_components=3).fit_transform(X)
    signs = np.sign(np.sum(ours * ref, axis=0))
    assert_allclose(ours * signs, ref, atol=1e-8)


def test_nothing_asked_leaves_the_data_unchanged():
    out = preprocess(X, {}, "here", COLUMNS)
    assert_allclose(out, X)


def test_log1p_refuses_values_at_or_below_minus_one():
    bad = X.copy()
    bad[4, 2] = -1.5
    with pytest.raises(InputError, match=r"column 'c2' holds -1.5 at data row 5"):
        preprocess(bad, {"log1p": True}, "here", COLUMNS)


def test_pca_first_larger_than_the_data():
    with pytest.raises(InputError, match=r"at most min\(n_rows, n_columns\) = 5"):
        preprocess(X, {"pca_first": 6}, "here", COLUMNS)


def test_preprocessing_of_generated_data_keeps_truth():
    plain = load({"name": "swiss_roll", "n": 300, "seed": 0})
    scaled = load({"name": "swiss_roll", "n": 300, "seed": 0, "scale": "standard"})
    assert_allclose(scaled.X, StandardScaler().fit_transform(plain.X))
    assert_allclose(scaled.truth, plain.truth)


@pytest.mark.parametrize("factor", [1e300, 1e-300])
@pytest.mark.parametrize("scale, scaler", [("standard", StandardScaler), ("minmax", MinMaxScaler)])
def test_scaling_is_blind_to_a_huge_or_tiny_factor(factor, scale, scaler):
    # Exact fact: both scalings are invariant to a positive factor per column, so the result
    # on X * 1e+-300 (whose squares leave float64) is scikit-learn's scaler applied to X.
    ours = preprocess(X * factor, {"scale": scale}, "here", COLUMNS)
    assert_allclose(ours, scaler().fit_transform(X), atol=1e-12)


@pytest.mark.parametrize("factor, words", [(1e120, "overflow"), (1e-120, "smallest normal")])
def test_unscaled_values_beyond_the_limits_are_refused(factor, words):
    with pytest.raises(InputError, match=f"{words}.*scale the data first"):
        preprocess(X * factor, {}, "here", COLUMNS)
    # Common practice puts the data on a unit scale; within [1e-100, 1e100] it is used as is.
    assert_allclose(preprocess(X * 1e90, {}, "here", COLUMNS), X * 1e90)
