"""Trustworthiness, continuity and kNN recall against scikit-learn and worked examples."""

import numpy as np
import pytest
from sklearn.manifold import trustworthiness as sklearn_trustworthiness

from lowdim.errors import InputError
from lowdim.metrics import continuity, knn_recall, qnx, trustworthiness

TOY_X = np.array([0.0, 1, 3, 7, 15])[:, None]
TOY_Y = np.array([0.0, 3, 1, 15, 7])[:, None]


def _tie_free(n=150, d=6, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, d))
    Y = X[:, :2] + 0.4 * rng.normal(size=(n, 2))
    return X, Y


@pytest.mark.parametrize("d", [3, 12])  # both distance paths: direct differences and BLAS
@pytest.mark.parametrize("k", [1, 5, 12, 40])
def test_trustworthiness_equals_scikit_learn(d, k):
    X, Y = _tie_free(d=d)
    # Source: sklearn.manifold.trustworthiness (scikit-learn 1.9), the reference implementation.
    assert trustworthiness(X, Y, k=k) == pytest.approx(
        sklearn_trustworthiness(X, Y, n_neighbors=k), abs=1e-9
    )


@pytest.mark.parametrize("k", [1, 7, 30])
def test_continuity_is_trustworthiness_with_spaces_swapped(k):
    X, Y = _tie_free(seed=1)
    # Source: REFERENCES.md [computed] (continuity = trustworthiness(Y, X) for Euclidean
    # inputs), checked against scikit-learn's trustworthiness with its arguments swapped.
    assert continuity(X, Y, k=k) == pytest.approx(
        sklearn_trustworthiness(Y, X, n_neighbors=k), abs=1e-9
    )
    assert continuity(X, Y, k=k) == pytest.approx(trustworthiness(Y, X, k=k), abs=1e-12)


def test_worked_toy_example():
    # Source: REFERENCES.md check values [computed]: T(1) = C(1) = 7/15, T(2) = C(2) = 0.8.
    assert trustworthiness(TOY_X, TOY_Y, k=1) == pytest.approx(7 / 15, abs=1e-12)
    assert continuity(TOY_X, TOY_Y, k=1) == pytest.approx(7 / 15, abs=1e-12)
    assert trustworthiness(TOY_X, TOY_Y, k=2) == pytest.approx(0.8, abs=1e-12)
    assert continuity(TOY_X, TOY_Y, k=2) == pytest.approx(0.8, abs=1e-12)


def test_ties_go_to_the_lower_index():
    X = np.arange(5.0)[:, None]
    Y = np.array([0.0, 2, 4, 1, 3])[:, None]
    # Source: REFERENCES.md [computed]: T = 0.2 with lower-index tie breaking (1/3 otherwise).
    assert trustworthiness(X, Y, k=1) == pytest.approx(0.2, abs=1e-12)


def test_scaled_and_shifted_copy_is_perfectly_trustworthy():
    X = np.random.default_rng(0).random((100, 2))
    # Source: scikit-learn's test_trustworthiness (5 + X / 10 gives T = 1 exactly).
    assert trustworthiness(X, 5 + X / 10, k=5) == 1.0
    assert continuity(X, 5 + X / 10, k=5) == 1.0


def test_duplicate_points_follow_the_tie_rule():
    # Duplicates make every distance among them 0; the rank rule must still reproduce a
    # plain computation of ranks with a stable sort (lower index first).
    rng = np.random.default_rng(3)
    base = rng.normal(size=(20, 3))
    X = np.vstack([base, base[:6]])
    Y = X[:, :2] + 0.01 * np.round(rng.normal(size=(26, 2)), 1)
    k = 4
    n = len(X)
    dx = ((X[:, None] - X[None]) ** 2).sum(-1)
    dy = ((Y[:, None] - Y[None]) ** 2).sum(-1)
    np.fill_diagonal(dx, np.inf)
    np.fill_diagonal(dy, np.inf)
    rank_x = np.empty((n, n), int)
    rank_x[np.arange(n)[:, None], np.argsort(dx, axis=1, kind="stable")] = np.arange(1, n + 1)
    near_y = np.argsort(dy, axis=1, kind="stable")[:, :k]
    penalty = np.maximum(rank_x[np.arange(n)[:, None], near_y] - k, 0).sum()
    # Source: Venna & Kaski 2001 formula with the REFERENCES.md tie convention, written plainly.
    expected = 1 - 2 / (n * k * (2 * n - 3 * k - 1)) * penalty
    assert trustworthiness(X, Y, k=k) == pytest.approx(expected, abs=1e-12)


def test_knn_recall_equals_qnx():
    X, Y = _tie_free(seed=2)
    # Source: Lee & Verleysen 2009: Q_NX(K) is the mean overlap of the K-ary neighbourhoods,
    # i.e. the recall of equal-size neighbour sets (a different code path here).
    for k in (1, 4, 20):
        assert knn_recall(X, Y, k=k) == pytest.approx(qnx(X, Y, k=k), abs=1e-12)
    assert knn_recall(X, X, k=5) == 1.0


def test_k_outside_the_formula_range_is_refused():
    X, Y = _tie_free(n=20)
    with pytest.raises(InputError, match="n/2.*Venna & Kaski"):
        trustworthiness(X, Y, k=10)
    with pytest.raises(InputError, match="at least 1"):
        continuity(X, Y, k=0)
    with pytest.raises(InputError, match="must be an int"):
        trustworthiness(X, Y, k=2.5)


def test_sampled_trustworthiness_is_close_to_the_exact_value():
    X, Y = _tie_free(n=600, seed=4)
    exact = trustworthiness(X, Y, k=10)
    estimate = trustworthiness(X, Y, k=10, exact_threshold=100, sample_size=200, random_state=1)
    assert estimate != exact
    assert abs(estimate - exact) < 0.02
