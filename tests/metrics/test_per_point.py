"""Per-point Q_NX, trustworthiness and continuity: their means are the global criteria."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from sklearn.manifold import trustworthiness as sklearn_trustworthiness

from lowdim.errors import InputError
from lowdim.metrics import continuity, per_point_quality, qnx, score_embedding, trustworthiness

# REFERENCES.md, trustworthiness and co-ranking check values (1-D toy, n = 5).
TOY_X = np.array([0.0, 1, 3, 7, 15])[:, None]
TOY_Y = np.array([0.0, 3, 1, 15, 7])[:, None]


def _pair(n=300, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 5))
    Y = X[:, :2] + 0.5 * rng.normal(size=(n, 2))
    return X, Y


def test_toy_terms_worked_by_hand():
    # Venna & Kaski's sums on the REFERENCES.md toy, point by point (n A = 1/3 for k = 1, 2):
    # k = 1: excess ranks in X of the embedding neighbours 1, 1, 1, 3, 2 and in Y of the input
    # neighbours 1, 1, 1, 2, 3; k = 2: 0, 0, 0, 2, 1 and 0, 0, 0, 1, 2. The neighbour sets
    # share nothing at k = 1 and both, both, both, one, one of two at k = 2.
    scores = per_point_quality(TOY_X, TOY_Y, ks=[1, 2])
    assert list(scores.rows) == [0, 1, 2, 3, 4]
    v = scores.values
    assert_allclose(v[("trustworthiness", 1)], [2 / 3, 2 / 3, 2 / 3, 0, 1 / 3])
    assert_allclose(v[("continuity", 1)], [2 / 3, 2 / 3, 2 / 3, 1 / 3, 0])
    assert_allclose(v[("trustworthiness", 2)], [1, 1, 1, 1 / 3, 2 / 3])
    assert_allclose(v[("continuity", 2)], [1, 1, 1, 2 / 3, 1 / 3])
    assert_allclose(v[("qnx", 1)], [0, 0, 0, 0, 0])
    assert_allclose(v[("qnx", 2)], [1, 1, 1, 0.5, 0.5])
    # The published toy values (REFERENCES.md): T(1) = C(1) = 7/15, T(2) = C(2) = 0.8,
    # Q_NX(1) = 0, Q_NX(2) = 0.8.
    assert v[("trustworthiness", 1)].mean() == pytest.approx(7 / 15, abs=1e-15)
    assert v[("continuity", 1)].mean() == pytest.approx(7 / 15, abs=1e-15)
    assert v[("trustworthiness", 2)].mean() == pytest.approx(0.8, abs=1e-15)
    assert v[("qnx", 2)].mean() == pytest.approx(0.8, abs=1e-15)


@pytest.mark.parametrize("k", [1, 5, 12, 40])
def test_means_are_scikit_learns_trustworthiness_and_continuity(k):
    # Outside reference: sklearn.manifold.trustworthiness; continuity is trustworthiness with
    # the spaces swapped (REFERENCES.md).
    X, Y = _pair()
    scores = per_point_quality(X, Y, ks=k)
    t = scores.values[("trustworthiness", k)]
    c = scores.values[("continuity", k)]
    assert t.mean() == pytest.approx(sklearn_trustworthiness(X, Y, n_neighbors=k), abs=1e-12)
    assert c.mean() == pytest.approx(sklearn_trustworthiness(Y, X, n_neighbors=k), abs=1e-12)


@pytest.mark.parametrize("k", [1, 7, 30, 299])
def test_mean_is_the_packages_own_qnx(k):
    X, Y = _pair()
    scores = per_point_quality(X, Y, ks=k)
    assert scores.values[("qnx", k)].mean() == pytest.approx(qnx(X, Y, k=k), abs=1e-14)


def test_score_embedding_keeps_the_same_terms_and_its_global_values_are_their_means():
    X, Y = _pair()
    scores = score_embedding(
        X, Y, metrics=["trustworthiness", "continuity", "qnx"], ks=(5, 10), per_point_k=(10, 30)
    )
    alone = per_point_quality(X, Y, ks=(10, 30))
    assert list(scores.per_point_rows) == list(range(300))
    assert scores.per_point.keys() == alone.values.keys()
    for key, values in alone.values.items():
        assert_allclose(scores.per_point[key], values, rtol=0, atol=0)
    assert scores.per_point[("trustworthiness", 10)].mean() == scores.get("trustworthiness", 10)
    assert scores.per_point[("continuity", 10)].mean() == scores.get("continuity", 10)
    assert scores.per_point[("qnx", 10)].mean() == pytest.approx(scores.get("qnx", 10), abs=1e-15)
    # Asking for per-point terms changes no global value.
    plain = score_embedding(X, Y, metrics=["trustworthiness", "continuity", "qnx"], ks=(5, 10))
    assert plain.values == scores.values
    assert plain.per_point == {} and plain.per_point_rows is None


def test_sampled_terms_use_the_query_rows_of_the_sampled_criteria():
    X, Y = _pair(n=400)
    kwargs = dict(exact_threshold=100, sample_size=60, random_state=3)
    scores = score_embedding(
        X, Y, metrics=["trustworthiness", "continuity"], ks=(8,), per_point_k=8, **kwargs
    )
    alone = per_point_quality(X, Y, ks=8, **kwargs)
    rows = scores.per_point_rows
    assert rows.size == 60 and np.all(np.diff(rows) > 0)
    assert np.array_equal(alone.rows, rows) and alone.sampled
    # the sampled estimate is the mean of the sampled rows' terms, exactly
    assert scores.per_point[("trustworthiness", 8)].mean() == scores.get("trustworthiness", 8)
    assert scores.per_point[("continuity", 8)].mean() == scores.get("continuity", 8)
    assert any("per-point values at the 60 query rows" in note for note in scores.notes)
    # each sampled row's term is its exact term
    exact = per_point_quality(X, Y, ks=8)
    for key in alone.values:
        assert_allclose(alone.values[key], exact.values[key][rows], rtol=0, atol=1e-15)
    columns = alone.columns()
    assert np.isnan(columns["trustworthiness@8"]).sum() == 400 - 60


def test_a_torn_circle_shows_the_tear_in_continuity_at_its_ends():
    # Exact fact: unrolling a circle onto its angle keeps every 4-neighbourhood (i +- 1,
    # i +- 2) except at the cut. There the input neighbours across the cut are n - 2 places
    # away in the embedding: c_0 = 1 - (195 + 194) / 774 with n A = 2 / (k (2n - 3k - 1)) =
    # 1/774, while the embedding neighbours that replace them (3 and 4) rank 5 and 7 in the
    # input (1, 199, 2, 198, 3, 197, 4: ties to the lower index), so trustworthiness barely
    # moves: t_0 = 1 - (1 + 3) / 774.
    n, k = 200, 4
    theta = 2 * np.pi * np.arange(n) / n
    X = np.c_[np.cos(theta), np.sin(theta)]
    Y = theta[:, None]
    scores = per_point_quality(X, Y, ks=k)
    c = scores.values[("continuity", k)]
    t = scores.values[("trustworthiness", k)]
    assert set(np.flatnonzero(c < 1)) == {0, 1, 198, 199}
    assert set(np.flatnonzero(t < 1)) <= {0, 1, 198, 199}
    assert c[0] == pytest.approx(1 - 389 / 774, abs=1e-12)
    assert t[0] == pytest.approx(1 - 4 / 774, abs=1e-12)
    assert c.mean() == pytest.approx(continuity(X, Y, k=k), abs=1e-15)
    assert t.mean() == pytest.approx(trustworthiness(X, Y, k=k), abs=1e-15)


def test_out_of_range_k_is_noted_and_bad_k_refused():
    X, Y = _pair(n=20)
    scores = per_point_quality(X, Y, ks=[3, 12])
    assert ("qnx", 12) in scores.values and ("trustworthiness", 12) not in scores.values
    assert any("per-point trustworthiness skipped at k = 12" in note for note in scores.notes)
    with pytest.raises(InputError, match="positive ints"):
        per_point_quality(X, Y, ks=[0])
