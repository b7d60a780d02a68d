"""The input side of scoring kept across embeddings gives the same numbers as computing it anew."""

import numpy as np
import pytest

from lowdim import datasets
from lowdim.metrics import _input_memo, _neighbors, score_embedding


@pytest.fixture(autouse=True)
def _clean_memo():
    _input_memo.forget()
    yield
    _input_memo.forget()


def _embeddings(X, seed=0):
    rng = np.random.default_rng(seed)
    first = X @ rng.normal(size=(X.shape[1], 2))
    second = np.tanh(X[:, :2]) + 0.05 * rng.normal(size=(X.shape[0], 2))
    return first, second


def _scores(X, Y, **settings):
    scores = score_embedding(X, Y, **settings)
    per_point = {key: value.tolist() for key, value in scores.per_point.items()}
    return scores.values, scores.standard_errors, per_point, scores.notes


@pytest.mark.parametrize(
    "n, settings",
    [
        # every criterion exact, distances through BLAS (more than four columns)
        (400, {"ks": (5, 10, 30), "per_point_k": 10}),
        # rnx_auc on sampled query rows (above its full-rank threshold), pairs on a subset
        (600, {"ks": (5, 10), "full_rank_threshold": 300, "pair_points": 200}),
        # every rank criterion on sampled rows, a seed other than 0
        (900, {"ks": (7,), "exact_threshold": 500, "sample_size": 150, "random_state": 3}),
    ],
)
def test_kept_input_side_gives_the_same_scores(n, settings):
    data = datasets.load({"name": "swiss_roll", "n": n, "noise": 0.1, "ambient_dim": 8})
    X = np.asarray(data.X, dtype=np.float64)
    common = {"labels": data.labels, "truth": data.truth, **settings}
    fresh = [_scores(X, Y, **common) for Y in _embeddings(X)]
    assert _input_memo.prime(X, 2, **common)
    memo = _input_memo.lookup(X.copy())  # found by content, not by identity
    assert "lists" in memo and any(key[0] == "distance_ranks" for key in memo if key != "lists")
    kept = [_scores(X, Y, **common) for Y in _embeddings(X)]
    assert kept == fresh


def test_the_kept_lists_are_not_computed_again(monkeypatch):
    data = datasets.load({"name": "s_curve", "n": 300})
    X = np.asarray(data.X, dtype=np.float64)
    _input_memo.prime(X, 2, ks=(5, 10))
    searched = []
    real = _neighbors.knn_lists
    monkeypatch.setattr(
        _neighbors, "knn_lists", lambda Z, k: searched.append(Z.shape) or real(Z, k)
    )
    Y = _embeddings(X)[0]
    score_embedding(X, Y, ks=(5, 10))
    assert searched == [Y.shape]  # the embedding's lists only


def test_other_data_and_large_data_are_not_kept():
    X = np.random.default_rng(0).normal(size=(200, 5))
    _input_memo.prime(X, 2, ks=(5,))
    assert _input_memo.lookup(X + 1e-12) is None
    big = np.zeros((_input_memo.MAX_ROWS + 1, 2))
    assert _input_memo.keep(big) is None and _input_memo.lookup(big) is None


def test_without_priming_nothing_is_kept():
    X = np.random.default_rng(1).normal(size=(200, 5))
    score_embedding(X, X[:, :2], ks=(5,))
    assert _input_memo.lookup(X) is None
