"""Q_NX, R_NX, LCMC and the R_NX area against a plain co-ranking matrix and worked values."""

import numpy as np
import pytest

from lowdim.errors import InputError
from lowdim.metrics import lcmc, qnx, rnx, rnx_auc
from lowdim.metrics.coranking import rnx_grid

TOY_X = np.array([0.0, 1, 3, 7, 15])[:, None]
TOY_Y = np.array([0.0, 3, 1, 15, 7])[:, None]


def _plain_coranking(X, Y):
    """The co-ranking matrix of Lee & Verleysen (2009) built from full rank matrices."""
    n = len(X)
    ranks = []
    for Z in (X, Y):
        d = ((Z[:, None] - Z[None]) ** 2).sum(-1)
        np.fill_diagonal(d, -1.0)  # self first, rank 0
        r = np.empty((n, n), int)
        r[np.arange(n)[:, None], np.argsort(d, axis=1, kind="stable")] = np.arange(n)
        ranks.append(r)
    off = ~np.eye(n, dtype=bool)
    Q = np.zeros((n - 1, n - 1), int)
    np.add.at(Q, (ranks[0][off] - 1, ranks[1][off] - 1), 1)
    return Q


def _plain_criteria(X, Y):
    Q = _plain_coranking(X, Y)
    n = len(X)
    K = np.arange(1, n)
    q = np.array([Q[:k, :k].sum() for k in K]) / (K * n)
    r = ((n - 1) * q[:-1] - K[:-1]) / (n - 1 - K[:-1])
    auc = (r / K[:-1]).sum() / (1 / K[:-1]).sum()
    return q, r, q - K / (n - 1), auc


def test_worked_toy_example():
    # Source: REFERENCES.md check values [computed] for X = [0,1,3,7,15], Y = [0,3,1,15,7].
    assert [qnx(TOY_X, TOY_Y, k=k) for k in range(1, 5)] == pytest.approx([0, 0.8, 2 / 3, 1])
    assert [rnx(TOY_X, TOY_Y, k=k) for k in range(1, 4)] == pytest.approx([-1 / 3, 0.6, -1 / 3])
    assert [lcmc(TOY_X, TOY_Y, k=k) for k in range(1, 5)] == pytest.approx(
        [-0.25, 0.3, -1 / 12, 0], abs=1e-12
    )
    assert round(rnx_auc(TOY_X, TOY_Y), 4) == -0.0788


@pytest.mark.parametrize("d", [2, 9])
def test_equal_to_a_plain_coranking_computation(d):
    rng = np.random.default_rng(d)
    X = rng.normal(size=(60, d))
    Y = X[:, :2] @ rng.normal(size=(2, 2)) + 0.5 * rng.normal(size=(60, 2))
    q, r, lc, auc = _plain_criteria(X, Y)
    # Source: Lee & Verleysen, Neurocomputing 72, 2009 (Q_NX, R_NX from the co-ranking
    # matrix); Chen & Buja, JASA 104, 2009 (LCMC); Lee, Peluffo-Ordonez & Verleysen 2015 (AUC).
    for k in (1, 2, 5, 17, 58):
        assert qnx(X, Y, k=k) == pytest.approx(q[k - 1], abs=1e-12)
        assert rnx(X, Y, k=k) == pytest.approx(r[k - 1], abs=1e-12)
        assert lcmc(X, Y, k=k) == pytest.approx(lc[k - 1], abs=1e-12)
    assert qnx(X, Y, k=59) == pytest.approx(1.0)
    assert rnx_auc(X, Y) == pytest.approx(auc, abs=1e-12)


def test_identity_embedding_is_perfect():
    X = np.random.default_rng(0).normal(size=(40, 3))
    # Source: REFERENCES.md [computed]: identity embedding, R_NX = 1 and AUC = 1.
    assert rnx(X, X, k=7) == 1.0
    assert rnx_auc(X, X) == pytest.approx(1.0, abs=1e-12)


def test_sampled_auc_is_near_the_exact_value():
    rng = np.random.default_rng(5)
    X = rng.normal(size=(400, 4))
    Y = X[:, :2] + 0.3 * rng.normal(size=(400, 2))
    exact = rnx_auc(X, Y)
    estimate = rnx_auc(X, Y, exact_threshold=100, sample_size=150)
    assert estimate != exact
    assert abs(estimate - exact) < 0.03


def test_log_grid_of_k():
    # The grid documented for the R_NX(K) curves: rounded powers of sqrt(2).
    assert rnx_grid(40) == [1, 2, 3, 4, 6, 8, 11, 16, 23, 32]


def test_k_out_of_range_is_refused():
    with pytest.raises(InputError, match="n - 2"):
        rnx(TOY_X, TOY_Y, k=4)
    with pytest.raises(InputError, match="n - 1"):
        qnx(TOY_X, TOY_Y, k=5)
