"""Friedman (exact, Monte Carlo, asymptotic), Nemenyi, Wilcoxon and Holm against outside values.

Sources: scipy.stats (friedmanchisquare, wilcoxon), Demšar (JMLR 7, 2006: Table 5 and the
worked example of Table 6, REFERENCES.md), exact counting arguments stated beside each check,
and Holm (1979)'s procedure worked by hand.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.stats import friedmanchisquare, rankdata, wilcoxon

from lowdim.analysis.stats import (
    critical_difference,
    friedman,
    friedman_chi2_from_mean_ranks,
    holm,
    iman_davenport,
    nemenyi_q,
    wilcoxon_signed_rank,
)


@pytest.mark.parametrize("ties", [False, True])
def test_friedman_statistic_equals_scipy(ties: bool) -> None:
    rng = np.random.default_rng(11 + ties)
    for n, k in ((5, 3), (12, 4), (30, 7)):
        values = rng.integers(0, 3, size=(n, k)) if ties else rng.standard_normal((n, k))
        if ties:
            values[0] = 1  # a fully tied row as well
        res = friedman(rankdata(values, axis=1))
        ref = friedmanchisquare(*values.T)  # scipy.stats.friedmanchisquare, tie-corrected
        assert res.statistic == pytest.approx(ref.statistic, rel=1e-12)
        assert res.chi2_p == pytest.approx(ref.pvalue, rel=1e-10)


def test_unanimous_ranks_of_two_datasets_are_one_chance_in_six() -> None:
    # REFERENCES.md (small-sample statistics): with N = 2 blocks ranking k = 3 configurations
    # identically, the exact probability of that agreement under the null is (1/3!)^(2-1) = 1/6;
    # the chi-square form gives chi2_F = 4, p = 0.135, and Iman-Davenport's F is undefined.
    res = friedman(np.tile([1.0, 2.0, 3.0], (2, 1)))
    assert res.p_method == "exact"
    assert res.p_value == pytest.approx(1 / 6, abs=1e-12)
    assert res.statistic == pytest.approx(4.0)
    assert res.chi2_p == pytest.approx(0.135, abs=5e-4)
    assert res.iman_davenport_f is None and res.iman_davenport_p is None


def test_unanimous_ranks_exact_p_for_six_blocks() -> None:
    # Exact fact: the statistic is at its maximum only when every block agrees with the first,
    # which happens with probability (1/k!)^(N-1) = 6^-5.
    res = friedman(np.tile([1.0, 2.0, 3.0], (6, 1)))
    assert res.p_method == "exact" and res.p_value == pytest.approx(6.0**-5, rel=1e-12)


def test_exact_p_equals_brute_force_enumeration_with_ties() -> None:
    # An oracle written out plainly: every arrangement of every row, the first row included.
    ranks = np.array([[1.0, 2.5, 2.5, 4.0], [2.0, 1.0, 3.0, 4.0], [1.5, 1.5, 3.0, 4.0]])
    observed = float(np.sum(ranks.sum(axis=0) ** 2))
    perms = [sorted(set(itertools.permutations(row))) for row in ranks]
    hits = total = 0
    for choice in itertools.product(*perms):
        total += 1
        hits += float(np.sum(np.sum(choice, axis=0) ** 2)) >= observed - 1e-9
    res = friedman(ranks)
    assert res.p_method == "exact"
    assert res.p_value == pytest.approx(hits / total, rel=1e-12)


def test_monte_carlo_p_is_close_to_the_exact_one_and_never_zero() -> None:
    rng = np.random.default_rng(3)
    ranks = rankdata(rng.standard_normal((4, 4)), axis=1)
    exact = friedman(ranks).p_value
    sampled = friedman(ranks, exact_limit=1)
    assert sampled.p_method == "monte_carlo" and sampled.draws == 20_000
    # binomial standard error of a p near 0.5 with 20,000 draws is about 0.0035
    assert abs(sampled.p_value - exact) < 0.02
    unanimous = friedman(np.tile(np.arange(1.0, 7.0), (6, 1)))
    assert unanimous.p_method == "monte_carlo"
    assert unanimous.p_value == pytest.approx(1 / 20_001)  # (1 + 0 hits) / (1 + draws)


def test_many_blocks_use_iman_davenport_and_all_ties_give_one() -> None:
    rng = np.random.default_rng(5)
    res = friedman(rankdata(rng.standard_normal((14, 4)), axis=1))
    assert res.p_method == "iman_davenport" and res.p_value == res.iman_davenport_p
    tied = friedman(np.full((3, 4), 2.5))
    assert tied.p_method == "none" and tied.p_value == 1.0 and tied.statistic == 0.0


def test_one_block_and_two_configurations() -> None:
    one = friedman(np.array([[1.0, 2.0, 3.0]]))
    # one block: each of the 3! arrangements is the only one, so p = 1 (nothing to compare)
    assert one.p_value == pytest.approx(1.0) and one.iman_davenport_f is None
    two = friedman(np.array([[1.0, 2.0]] * 3))
    # k = 2, N = 3, unanimous: (1/2!)^2 = 1/4 (exact counting)
    assert two.p_value == pytest.approx(0.25)


def test_nemenyi_q_matches_demsar_table() -> None:
    # Demšar, JMLR 7, 2006, Table 5(a), q_0.05 for k = 2 .. 10 (REFERENCES.md).
    published = [1.960, 2.343, 2.569, 2.728, 2.850, 2.949, 3.031, 3.102, 3.164]
    for k, q in zip(range(2, 11), published, strict=True):
        assert abs(nemenyi_q(k, 0.05) - q) < 2e-3, k
        assert critical_difference(k, 10) == pytest.approx(
            nemenyi_q(k) * math.sqrt(k * (k + 1) / 60)
        )
    assert abs(nemenyi_q(2, 0.10) - 1.645) < 2e-3 and abs(nemenyi_q(10, 0.10) - 2.920) < 2e-3


def test_demsar_worked_example() -> None:
    # Demšar 2006, four C4.5 variants on 14 data sets (REFERENCES.md, from memory + computed):
    # mean ranks 3.143, 2.000, 2.893, 1.964 give chi2_F = 9.28, F_F = 3.69, CD(0.05) = 1.25,
    # CD(0.10) = 1.12.
    mean = np.array([3.143, 2.000, 2.893, 1.964])
    chi2 = friedman_chi2_from_mean_ranks(mean, 14)
    assert chi2 == pytest.approx(9.28, abs=0.01)
    f, p = iman_davenport(chi2, 14, 4)
    assert f == pytest.approx(3.69, abs=0.01)
    assert 0.01 < p < 0.05  # the paper rejects at 0.05 with F(3, 39)
    assert critical_difference(4, 14, 0.05) == pytest.approx(1.25, abs=0.005)
    assert critical_difference(4, 14, 0.10) == pytest.approx(1.12, abs=0.005)


def test_wilcoxon_equals_scipy_exact_without_ties() -> None:
    rng = np.random.default_rng(0)
    for n in (2, 3, 5, 8, 12, 20):
        a, b = rng.standard_normal(n), rng.standard_normal(n)
        ours = wilcoxon_signed_rank(a, b)
        ref = wilcoxon(a, b, method="exact")  # scipy.stats.wilcoxon, two-sided
        assert ours.method == "exact"
        assert ours.p_value == pytest.approx(ref.pvalue, rel=1e-12)
        assert ours.median_difference == pytest.approx(np.median(a - b))


def test_wilcoxon_small_samples_and_zeros() -> None:
    # REFERENCES.md: with N = 2 pairs the smallest two-sided Wilcoxon p is 0.5 (2 of 4 sign
    # assignments are as extreme).
    assert wilcoxon_signed_rank(np.array([2.0, 3.0]), np.array([1.0, 1.0])).p_value == 0.5
    # Zero differences are dropped (Wilcoxon's rule); all zeros: no evidence, p = 1.
    same = wilcoxon_signed_rank(np.ones(4), np.ones(4))
    assert same.p_value == 1.0 and same.n_used == 0 and same.method == "none"
    # Tied magnitudes: enumerate the 2^3 sign assignments of ranks (2, 2, 2) by hand; W+ = 6
    # is reached by 1 of 8, and |W+ - 3| >= 3 by 2 of 8: p = 0.25.
    tied = wilcoxon_signed_rank(np.array([1.0, 1.0, 1.0]), np.zeros(3))
    assert tied.p_value == pytest.approx(0.25) and tied.statistic == pytest.approx(6.0)


def test_wilcoxon_normal_approximation_above_the_exact_limit() -> None:
    rng = np.random.default_rng(1)
    a, b = rng.standard_normal(300), rng.standard_normal(300)
    ours = wilcoxon_signed_rank(a, b)
    ref = wilcoxon(a, b, method="asymptotic", correction=False)
    assert ours.method == "normal"
    assert ours.p_value == pytest.approx(ref.pvalue, rel=1e-6)


def test_holm_by_hand() -> None:
    # Holm 1979: sorted p 0.005, 0.01, 0.03, 0.04 times 4, 3, 2, 1 = 0.02, 0.03, 0.06, 0.04,
    # made non-decreasing: 0.02, 0.03, 0.06, 0.06; returned in the input's order.
    np.testing.assert_allclose(holm([0.01, 0.04, 0.03, 0.005]), [0.03, 0.06, 0.06, 0.02])
    np.testing.assert_allclose(holm([0.6, 0.9]), [1.0, 1.0])
    assert holm([]).size == 0
