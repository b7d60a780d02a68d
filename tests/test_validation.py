"""Parameter specs and data checks shared by the estimators."""

import numpy as np
import pytest

from lowdim._validation import (
    NONE,
    Interval,
    Options,
    Pattern,
    check_data,
    check_param,
    check_params,
    largest_asymmetry,
)
from lowdim.errors import InputError


class _Demo:
    _param_specs = {
        "n_neighbors": [Interval(int, 1, "n_samples - 1")],
        "kernel": [Options(("rbf", "linear"))],
        "bandwidth": [
            Interval(float, 0, None, closed="neither"),
            Pattern(r"local(:\d+)?", "'local' or 'local:K'"),
        ],
        "alpha": [NONE, Interval(float, 0, 1)],
    }

    def __init__(self, n_neighbors=5, kernel="rbf", bandwidth=1.0, alpha=None):
        self.n_neighbors, self.kernel, self.bandwidth, self.alpha = (
            n_neighbors,
            kernel,
            bandwidth,
            alpha,
        )


def test_message_names_parameter_owner_rule_and_value():
    with pytest.raises(InputError) as err:
        check_params(_Demo(n_neighbors=0), n_samples=50)
    assert str(err.value) == (
        "the parameter `n_neighbors` of `_Demo` must be an int in [1, n_samples - 1], got 0"
    )


def test_data_dependent_bound_checked_only_when_size_known():
    check_params(_Demo(n_neighbors=100))  # size unknown: upper bound not applied
    with pytest.raises(InputError, match="n_samples - 1"):
        check_params(_Demo(n_neighbors=50), n_samples=50)
    check_params(_Demo(n_neighbors=49), n_samples=50)


def test_bool_is_not_an_int():
    with pytest.raises(InputError, match="got True"):
        check_params(_Demo(n_neighbors=True))


def test_options_suggest_closest():
    with pytest.raises(
        InputError, match=r"one of 'rbf', 'linear', got 'rfb' \(did you mean 'rbf'\?\)"
    ):
        check_params(_Demo(kernel="rfb"))


def test_alternatives_are_all_listed():
    with pytest.raises(
        InputError, match=r"a number in \(0, inf\) or 'local' or 'local:K', got -1"
    ):
        check_params(_Demo(bandwidth=-1))
    check_params(_Demo(bandwidth="local:12"))
    check_params(_Demo(alpha=None))
    with pytest.raises(InputError, match=r"None or a number in \[0, 1\], got 1.5"):
        check_params(_Demo(alpha=1.5))


def test_nan_is_outside_every_interval():
    with pytest.raises(InputError):
        check_param("X", "bandwidth", float("nan"), [Interval(float, 0, None)], {})


@pytest.mark.parametrize(
    ("data", "pattern"),
    [
        (np.arange(5.0), r"must be a 2-D array .* got 1-D"),
        (np.ones((1, 3)), r"at least 2 samples .* n_samples=1"),
        (
            np.array([[1.0, np.nan], [2.0, 3.0]]),
            r"NaN or infinity \(1 values, first at row 0, column 1\)",
        ),
        (np.array([[1.0, 2.0], [np.inf, 3.0]]), r"first at row 1, column 0"),
        ([["a", "b"], ["c", "d"]], "must hold numbers only"),
        (np.array([[1 + 1j, 2], [3, 4]]), "Complex data not supported"),
    ],
)
def test_check_data_words_each_problem(data, pattern):
    with pytest.raises(InputError, match=pattern):
        check_data(data, "Demo")


def test_check_data_refuses_sparse_with_type_error():
    import scipy.sparse

    with pytest.raises(TypeError, match="sparse"):
        check_data(scipy.sparse.eye(3, format="csr"), "Demo")


def test_largest_asymmetry_matches_the_plain_transpose():
    # A naive oracle: np.abs(A - A.T) over the whole matrix (exact fact)
    rng = np.random.default_rng(4)
    A = rng.normal(size=(300, 300))
    A = A + A.T
    A[217, 41] += 0.5
    gap, i, j = largest_asymmetry(A, tile=64)
    plain = np.abs(A - A.T)
    assert gap == plain.max() == 0.5
    assert {i, j} == {217, 41}
    assert largest_asymmetry(A + A.T)[0] == 0.0
