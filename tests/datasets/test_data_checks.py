"""The worded checks on loaded data, called directly."""

import warnings

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from lowdim.datasets.checks import (
    DataWarning,
    _duplicated,
    check_finite,
    check_row_count,
    count_duplicates,
    drop_constant_columns,
    numeric_matrix,
)
from lowdim.errors import InputError


def test_row_counts():
    with pytest.raises(InputError, match="has a header line but no data rows"):
        check_row_count(0, "the file 'x.csv'", header=True)
    with pytest.raises(InputError, match="'x.npy' has no data rows"):
        check_row_count(0, "the file 'x.npy'")
    with pytest.raises(InputError, match="only one data row"):
        check_row_count(1, "here")
    check_row_count(2, "here")


def test_numeric_matrix_converts_numeric_text_and_refuses_words():
    frame = pd.DataFrame({"a": [1, 2, 3], "b": ["4", "5.5", None]}, dtype=object)
    X = numeric_matrix(frame, "here")
    assert X.dtype == np.float64 and np.isnan(X[2, 1])
    assert_allclose(X[:2], [[1, 4], [2, 5.5]])
    words = pd.DataFrame({"a": [1.0, 2.0, 3.0], "b": ["1", "2", "three"]})
    with pytest.raises(InputError, match=r"column 'b' holds text .* 'three' at data row 3"):
        numeric_matrix(words, "here")


def test_missing_values_are_shown_in_reading_order_and_cut_after_three():
    X = np.ones((5, 3))
    X[[0, 1, 3, 4], [2, 0, 1, 2]] = np.nan
    with pytest.raises(InputError) as info:
        check_finite(X, ["p", "q", "r"], "here")
    message = str(info.value)
    assert "has 4 missing values" in message
    assert "row 1 column 'r', row 2 column 'p', row 4 column 'q', ..., rows counted" in message


def test_infinities_are_counted_separately_from_missing_values():
    X = np.ones((3, 2))
    X[1, 1] = -np.inf
    with pytest.raises(
        InputError, match=r"has 1 infinite values \(first at data row 2 column 'q'"
    ):
        check_finite(X, ["p", "q"], "here")
    check_finite(np.ones((2, 2)), ["p", "q"], "here")


def test_constant_columns():
    X = np.array([[1.0, 7, 2, 0], [2.0, 7, 3, 0], [3.0, 7, 1, 0]])
    notes = []
    with pytest.warns(DataWarning, match=r"dropped 2 constant column\(s\) \('k', 'z'\)"):
        kept, names, dropped = drop_constant_columns(X, ["a", "k", "b", "z"], "here", notes)
    assert_allclose(kept, X[:, [0, 2]])
    assert names == ["a", "b"] and dropped == ["k", "z"] and len(notes) == 1
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        drop_constant_columns(X, ["a", "k", "b", "z"], "here", [], warn=False)
    with pytest.raises(InputError, match="every column is constant"):
        drop_constant_columns(X[:, [1, 3]], ["k", "z"], "here", [])


def test_duplicates_are_counted_not_removed():
    X = np.array([[0.0, 1], [2, 3], [0, 1], [0, 1], [4, 5]])
    notes = []
    with pytest.warns(DataWarning, match=r"2 duplicate row\(s\) \(the first at data row 3"):
        assert count_duplicates(X, "here", notes) == 2
    assert count_duplicates(np.eye(3), "here", []) == 0


def test_row_hashing_finds_exactly_the_rows_pandas_finds():
    # Oracle: pandas.DataFrame.duplicated, on data with many repeats and a signed zero.
    rng = np.random.default_rng(0)
    X = rng.integers(0, 3, size=(3000, 4)).astype(float)
    X[::5, 2] = -0.0  # equal to 0.0 as a number, different as bits
    X[::11, 0] = 0.0
    assert_array_equal(_duplicated(X), pd.DataFrame(X + 0.0).duplicated().to_numpy())
    assert not _duplicated(rng.normal(size=(500, 3))).any()
