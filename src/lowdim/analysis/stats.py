"""Tests for comparing configurations over blocks: Friedman, Nemenyi, Wilcoxon with Holm.

The input of the omnibus test is a rank matrix: one row per *block* (a dataset, or one
resample of a file's rows), one column per configuration, each row holding the ranks 1 .. k
(1 = best, ties averaged). The formulas follow Demšar (2006); the small-sample and pairwise
practice follows Benavoli, Corani & Mangili (2016). ``shared/REFERENCES.md`` has both.

Which form of a p-value is used is part of the result (``p_method``), because a p-value is
only as good as the distribution it is read from:

- Friedman: *exact* (the permutation distribution of the statistic, enumerated, with the
  rows' own ties) when the (k!)^(N-1) rank assignments are few enough; otherwise *Iman-
  Davenport's F* for N >= :data:`ASYMPTOTIC_BLOCKS` blocks (the chi-square when F is
  undefined); otherwise a *Monte Carlo* estimate from :data:`DRAWS` random assignments with
  a fixed seed, ``(1 + hits) / (1 + draws)``, which is never 0.
- Wilcoxon signed-rank: exact over the 2^n sign assignments (ties and all) for up to
  :data:`EXACT_WILCOXON` non-zero differences, the normal approximation above.

References
----------
.. [1] J. Demšar, "Statistical comparisons of classifiers over multiple data sets",
   Journal of Machine Learning Research 7, 1-30, 2006.
.. [2] R. L. Iman and J. M. Davenport, "Approximations of the critical region of the
   Friedman statistic", Communications in Statistics 9(6), 571-595, 1980.
   https://doi.org/10.1080/03610928008827904
.. [3] A. Benavoli, G. Corani and F. Mangili, "Should we really use post-hoc tests based on
   mean-ranks?", Journal of Machine Learning Research 17, 1-10, 2016.
.. [4] S. Holm, "A simple sequentially rejective multiple test procedure", Scandinavian
   Journal of Statistics 6, 65-70, 1979.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import stats as _st

from lowdim.errors import InputError

__all__ = [
    "ASYMPTOTIC_BLOCKS",
    "DRAWS",
    "EXACT_LIMIT",
    "EXACT_WILCOXON",
    "FriedmanResult",
    "WilcoxonResult",
    "friedman",
    "friedman_chi2_from_mean_ranks",
    "iman_davenport",
    "nemenyi_q",
    "critical_difference",
    "wilcoxon_signed_rank",
    "holm",
]

EXACT_LIMIT = 200_000
"""Largest number of rank assignments the exact Friedman p enumerates."""
ASYMPTOTIC_BLOCKS = 10
"""From this many blocks on, a Friedman p that cannot be exact is read from the F form."""
DRAWS = 20_000
"""Random rank assignments behind a Monte Carlo Friedman p."""
EXACT_WILCOXON = 200
"""Most non-zero differences for which the Wilcoxon p is enumerated exactly."""


@dataclass(frozen=True)
class FriedmanResult:
    """Friedman's test of k configurations over N blocks.

    Attributes
    ----------
    statistic : float
        Friedman's chi2_F, corrected for ties as ``scipy.stats.friedmanchisquare`` does.
    p_value : float
        The p-value the verdict uses, from the form named in ``p_method``.
    p_method : {"exact", "monte_carlo", "iman_davenport", "chi_square", "none"}
        "none" when every block ties every configuration (p = 1: no evidence of a difference).
    draws : int or None
        Random assignments behind a Monte Carlo p.
    chi2_p : float
        The chi-square approximation's p (k - 1 df), reported beside the others.
    iman_davenport_f, iman_davenport_p : float or None
        Iman-Davenport's F on (k - 1, (k - 1)(N - 1)) df and its p; None where F is undefined
        (one block, or every block ranking the configurations the same way).
    mean_ranks : numpy.ndarray
        Mean rank of each configuration (column).
    n_blocks, n_configurations : int
        N and k.
    """

    statistic: float
    p_value: float
    p_method: str
    draws: int | None
    chi2_p: float
    iman_davenport_f: float | None
    iman_davenport_p: float | None
    mean_ranks: np.ndarray
    n_blocks: int
    n_configurations: int


def _check_counts(n_configurations: int, n_blocks: int) -> tuple[int, int]:
    if int(n_configurations) < 2 or int(n_blocks) < 1:
        raise InputError(
            f"a comparison needs at least 2 configurations and 1 block, got "
            f"{n_configurations} configurations and {n_blocks} blocks; add methods or datasets"
        )
    return int(n_configurations), int(n_blocks)


def friedman_chi2_from_mean_ranks(mean_ranks: np.ndarray, n_blocks: int) -> float:
    """Friedman's statistic from the mean ranks alone (no tie correction).

    chi2_F = 12 N / (k (k + 1)) [sum_j R_j^2 - k (k + 1)^2 / 4]  (Demšar 2006, sec. 3.2.2).
    """
    r = np.asarray(mean_ranks, dtype=float)
    k, n = _check_counts(r.size, n_blocks)
    return float(12.0 * n / (k * (k + 1)) * (np.sum(r**2) - k * (k + 1) ** 2 / 4.0))


def iman_davenport(chi2: float, n_blocks: int, n_configurations: int) -> tuple[float, float]:
    """Iman-Davenport F_F = (N - 1) chi2_F / (N (k - 1) - chi2_F) and its p-value.

    Returns ``(nan, nan)`` where F is undefined: one block, or a zero denominator (every block
    ranks the configurations identically), where F would be infinite and its p 0 whatever N.
    """
    k, n = _check_counts(n_configurations, n_blocks)
    denominator = n * (k - 1) - chi2
    if n < 2 or denominator <= 1e-12 * n * (k - 1):
        return math.nan, math.nan
    f = (n - 1) * chi2 / denominator
    return float(f), float(_st.f.sf(f, k - 1, (k - 1) * (n - 1)))


@lru_cache(maxsize=128)
def nemenyi_q(n_configurations: int, alpha: float = 0.05) -> float:
    """The Nemenyi q_alpha: the studentized range quantile (infinite df) over sqrt(2)."""
    k, _ = _check_counts(n_configurations, 1)
    if not 0.0 < alpha < 1.0:
        raise InputError(f"`alpha` must be in (0, 1), got {alpha}; use e.g. 0.05")
    return float(_st.studentized_range.ppf(1.0 - alpha, k, np.inf) / math.sqrt(2.0))


def critical_difference(n_configurations: int, n_blocks: int, alpha: float = 0.05) -> float:
    """Nemenyi critical difference CD = q_alpha sqrt(k (k + 1) / (6 N)) (Demšar 2006)."""
    k, n = _check_counts(n_configurations, n_blocks)
    return nemenyi_q(k, alpha) * math.sqrt(k * (k + 1) / (6.0 * n))


def _tie_correction(r: np.ndarray) -> float:
    n, k = r.shape
    ties = 0.0
    for row in r:
        _, counts = np.unique(row, return_counts=True)
        ties += float(np.sum(counts.astype(float) ** 3 - counts))
    return 1.0 - ties / (n * (k**3 - k))


def _row_arrangements(row: np.ndarray) -> int:
    """Distinct orderings of a row's values: k! over the factorials of the tie sizes."""
    _, counts = np.unique(row, return_counts=True)
    total = math.factorial(row.size)
    for c in counts:
        total //= math.factorial(int(c))
    return total


def _sum_of_squares(sums: np.ndarray) -> np.ndarray:
    return np.sum(sums**2, axis=-1)


def _exact_p(r: np.ndarray, observed: float) -> float:
    """P(sum_j R_j^2 >= observed) over every arrangement of rows 2 .. N (row 1 fixed).

    Relabelling the configurations leaves the statistic unchanged, so fixing the first row
    loses nothing; the distribution is built row by row over the vectors of column sums.
    Ranks are doubled to integers (ties average to halves).
    """
    doubled = np.rint(2 * r).astype(np.int64)
    states: dict[tuple, int] = {tuple(doubled[0]): 1}
    for row in doubled[1:]:
        arrangements = np.array(sorted(set(itertools.permutations(row.tolist()))))
        nxt: dict[tuple, int] = {}
        for state, count in states.items():
            for total in map(tuple, arrangements + np.array(state)):
                nxt[total] = nxt.get(total, 0) + count
        states = nxt
    sums = np.array(list(states))
    counts = np.array(list(states.values()), dtype=float)
    stat = _sum_of_squares(sums.astype(float) / 2.0)
    hits = counts[stat >= observed - 1e-9 * max(1.0, observed)].sum()
    return float(hits / counts.sum())


def _monte_carlo_p(r: np.ndarray, observed: float, draws: int, seed: int) -> float:
    rng = np.random.default_rng(seed)
    n, k = r.shape
    sums = np.zeros((draws, k))
    for row in r:
        sums += rng.permuted(np.broadcast_to(row, (draws, k)), axis=1)
    hits = int(np.sum(_sum_of_squares(sums) >= observed - 1e-9 * max(1.0, observed)))
    return (1.0 + hits) / (1.0 + draws)


def friedman(
    ranks: np.ndarray,
    *,
    exact_limit: int = EXACT_LIMIT,
    draws: int = DRAWS,
    seed: int = 0,
) -> FriedmanResult:
    """Friedman's test on a rank matrix (blocks x configurations), p-value form as documented.

    Parameters
    ----------
    ranks : array of shape (n_blocks, n_configurations)
        Ranks within each row, 1 = best, ties averaged.
    exact_limit : int, default=EXACT_LIMIT
        Largest number of rank assignments to enumerate for the exact p.
    draws : int, default=DRAWS
        Random assignments for a Monte Carlo p.
    seed : int, default=0
        Seed of the Monte Carlo draws, so the p-value is repeatable.

    Returns
    -------
    FriedmanResult
    """
    r = np.asarray(ranks, dtype=float)
    if r.ndim != 2:
        raise InputError(f"the rank matrix must be 2-D (blocks x configurations), got {r.ndim}-D")
    n, k = r.shape
    _check_counts(k, n)
    mean_ranks = r.mean(axis=0)
    correction = _tie_correction(r)
    if correction <= 0.0:  # every block ties every configuration: no evidence of a difference
        return FriedmanResult(0.0, 1.0, "none", None, 1.0, None, None, mean_ranks, n, k)
    chi2 = friedman_chi2_from_mean_ranks(mean_ranks, n) / correction
    chi2_p = float(_st.chi2.sf(chi2, k - 1))
    f, f_p = iman_davenport(chi2, n, k)
    f_or_none = None if math.isnan(f) else f
    f_p_or_none = None if math.isnan(f_p) else f_p
    observed = float(_sum_of_squares(r.sum(axis=0)))
    assignments = math.prod(_row_arrangements(row) for row in r[1:])
    if assignments <= exact_limit:
        p, method, used = _exact_p(r, observed), "exact", None
    elif n >= ASYMPTOTIC_BLOCKS:
        p, method, used = (
            (f_p_or_none, "iman_davenport", None)
            if f_p_or_none is not None
            else (chi2_p, "chi_square", None)
        )
    else:
        p, method, used = _monte_carlo_p(r, observed, draws, seed), "monte_carlo", draws
    return FriedmanResult(
        statistic=float(chi2),
        p_value=float(min(1.0, p)),
        p_method=method,
        draws=used,
        chi2_p=chi2_p,
        iman_davenport_f=f_or_none,
        iman_davenport_p=f_p_or_none,
        mean_ranks=mean_ranks,
        n_blocks=n,
        n_configurations=k,
    )


@dataclass(frozen=True)
class WilcoxonResult:
    """Wilcoxon's signed-rank test on paired values, two-sided.

    Attributes
    ----------
    n_pairs : int
        Pairs given.
    n_used : int
        Pairs with a non-zero difference (zero differences are dropped, Wilcoxon's rule).
    statistic : float
        W+, the sum of the ranks of |d| over the positive differences.
    p_value : float
        Two-sided p; 1 when every difference is zero.
    method : {"exact", "normal", "none"}
    median_difference : float
        The effect size: the median of the paired differences (zeros included).
    """

    n_pairs: int
    n_used: int
    statistic: float
    p_value: float
    method: str
    median_difference: float


def _exact_signed_rank_p(doubled: np.ndarray, observed: int) -> float:
    """Two-sided p of W+ over all 2^n sign assignments, by counting subset sums of ranks."""
    total = int(doubled.sum())
    counts = np.zeros(total + 1, dtype=float)
    counts[0] = 1.0
    for r in doubled:
        counts[r:] = counts[r:] + counts[: total + 1 - r].copy()
    sums = np.arange(total + 1)
    centre = total / 2.0
    extreme = np.abs(sums - centre) >= abs(observed - centre) - 1e-9
    return float(counts[extreme].sum() / counts.sum())


def wilcoxon_signed_rank(a: np.ndarray, b: np.ndarray) -> WilcoxonResult:
    """Two-sided Wilcoxon signed-rank test of the paired differences ``a - b``.

    Zero differences are dropped; the others are ranked by magnitude (ties averaged). Up to
    :data:`EXACT_WILCOXON` of them the p-value is exact over the 2^n equally likely sign
    assignments (it equals ``scipy.stats.wilcoxon(..., method="exact")`` when there are no
    ties); above, the normal approximation with the tie correction.
    """
    d = np.asarray(a, dtype=float) - np.asarray(b, dtype=float)
    if d.ndim != 1 or d.size == 0 or not np.all(np.isfinite(d)):
        raise InputError("the paired values must be two finite 1-D arrays of the same length")
    median = float(np.median(d))
    nonzero = d[d != 0.0]
    n = int(nonzero.size)
    if n == 0:
        return WilcoxonResult(int(d.size), 0, 0.0, 1.0, "none", median)
    ranks = _st.rankdata(np.abs(nonzero))
    w_plus = float(ranks[nonzero > 0].sum())
    if n <= EXACT_WILCOXON:
        doubled = np.rint(2 * ranks).astype(np.int64)
        p = _exact_signed_rank_p(doubled, int(round(2 * w_plus)))
        return WilcoxonResult(int(d.size), n, w_plus, min(1.0, p), "exact", median)
    mean = n * (n + 1) / 4.0
    _, counts = np.unique(ranks, return_counts=True)
    var = n * (n + 1) * (2 * n + 1) / 24.0 - float(np.sum(counts**3 - counts)) / 48.0
    z = (w_plus - mean) / math.sqrt(var)
    p = float(2.0 * _st.norm.sf(abs(z)))
    return WilcoxonResult(int(d.size), n, w_plus, min(1.0, p), "normal", median)


def holm(p_values: np.ndarray) -> np.ndarray:
    """Holm's step-down adjusted p-values (Holm 1979), in the input's order.

    The i-th smallest of m p-values is multiplied by m - i + 1 (i from 1), capped at 1, and
    the adjusted values are made non-decreasing in that order.
    """
    p = np.asarray(p_values, dtype=float)
    m = p.size
    if m == 0:
        return p.copy()
    order = np.argsort(p, kind="stable")
    scaled = np.minimum(1.0, p[order] * (m - np.arange(m)))
    adjusted = np.empty(m)
    adjusted[order] = np.maximum.accumulate(scaled)
    return adjusted
