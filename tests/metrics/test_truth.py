"""Ground-truth criteria: Spearman against intrinsic distances and Procrustes disparity."""

import numpy as np
import pytest
from scipy.spatial import procrustes
from scipy.spatial.distance import pdist
from scipy.stats import spearmanr

from lowdim.errors import InputError
from lowdim.metrics import truth_procrustes, truth_spearman


def _data(seed=0):
    rng = np.random.default_rng(seed)
    truth = rng.uniform(size=(70, 2))
    X = np.c_[truth, np.sin(3 * truth[:, 0])]
    Y = truth @ np.array([[1.0, 0.4], [0.2, 2.0]]) + 0.05 * rng.normal(size=(70, 2))
    return X, Y, truth


def test_truth_spearman_equals_scipy():
    X, Y, truth = _data()
    # Source: scipy.stats.spearmanr on pdist of the truth and of the embedding.
    expected = spearmanr(pdist(truth), pdist(Y)).statistic
    assert truth_spearman(X, Y, truth=truth) == pytest.approx(expected, abs=1e-12)


def test_truth_procrustes_equals_scipy():
    X, Y, truth = _data(1)
    # Source: scipy.spatial.procrustes disparity (Gower 1975).
    assert truth_procrustes(X, Y, truth=truth) == pytest.approx(procrustes(truth, Y)[2], abs=1e-12)


def test_similarity_transform_of_the_truth_scores_perfectly():
    X, _, truth = _data(2)
    rotation = np.array([[0.0, -1.0], [1.0, 0.0]])
    Y = 4.0 * truth @ rotation - 2.0
    # Exact fact: a similarity transform leaves disparity 0 and rank correlation 1.
    assert truth_procrustes(X, Y, truth=truth) == pytest.approx(0.0, abs=1e-12)
    assert truth_spearman(X, Y, truth=truth) == pytest.approx(1.0, abs=1e-12)


def test_truth_mistakes_are_worded():
    X, Y, truth = _data()
    with pytest.raises(InputError, match="needs the intrinsic"):
        truth_spearman(X, Y)
    with pytest.raises(InputError, match="same number"):
        truth_procrustes(X, Y, truth=truth[:, :1])
    with pytest.raises(InputError, match="one row per row"):
        truth_spearman(X, Y, truth=truth[:-2])
