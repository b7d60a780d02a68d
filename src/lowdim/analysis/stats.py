"""Comparing several methods over several datasets: Friedman, Iman-Davenport and Nemenyi.

The input is a rank matrix: one row per dataset, one column per method, each row holding the
ranks 1 .. k of the methods on that dataset (1 = best, ties averaged). The tests and the
critical difference follow Demšar (2006); the formulas are in ``REFERENCES.md``.

References
----------
.. [1] J. Demšar, "Statistical comparisons of classifiers over multiple data sets",
   Journal of Machine Learning Research 7, 1-30, 2006.
.. [2] R. L. Iman and J. M. Davenport, "Approximations of the critical region of the
   Friedman statistic", Communications in Statistics 9(6), 571-595, 1980.
   https://doi.org/10.1080/03610928008827904
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import stats as _st

from lowdim.errors import InputError

__all__ = [
    "FriedmanResult",
    "friedman_test",
    "friedman_chi2_from_mean_ranks",
    "iman_davenport",
    "nemenyi_q",
    "critical_difference",
]


@dataclass(frozen=True)
class FriedmanResult:
    """Friedman and Iman-Davenport tests with the Nemenyi critical difference.

    Attributes
    ----------
    friedman_chi2, p_value : float
        The tie-corrected Friedman statistic and its chi-square p-value (k - 1 df).
    iman_davenport_f, iman_davenport_p : float
        The Iman-Davenport F and its p-value on (k - 1, (k - 1)(N - 1)) df.
    critical_difference : float
        The Nemenyi critical difference of mean ranks at level ``alpha``.
    mean_ranks : numpy.ndarray
        Mean rank of each method (column) over the datasets.
    n_datasets, n_methods : int
        N and k.
    """

    friedman_chi2: float
    p_value: float
    iman_davenport_f: float
    iman_davenport_p: float
    critical_difference: float
    mean_ranks: np.ndarray
    n_datasets: int
    n_methods: int


def _check_counts(n_methods: int, n_datasets: int) -> tuple[int, int]:
    if int(n_methods) < 2 or int(n_datasets) < 1:
        raise InputError(
            f"a comparison needs at least 2 methods and 1 dataset, got {n_methods} methods "
            f"and {n_datasets} datasets; add methods or datasets to the suite."
        )
    return int(n_methods), int(n_datasets)


def friedman_chi2_from_mean_ranks(mean_ranks: np.ndarray, n_datasets: int) -> float:
    """Friedman's statistic from the mean ranks alone (no tie correction).

    chi2_F = 12 N / (k (k + 1)) [sum_j R_j^2 - k (k + 1)^2 / 4]  (Demšar 2006, eq. in sec. 3.2.2).
    """
    r = np.asarray(mean_ranks, dtype=float)
    k, n = _check_counts(r.size, n_datasets)
    return float(12.0 * n / (k * (k + 1)) * (np.sum(r**2) - k * (k + 1) ** 2 / 4.0))


def iman_davenport(chi2: float, n_datasets: int, n_methods: int) -> tuple[float, float]:
    """Iman-Davenport F_F = (N - 1) chi2_F / (N (k - 1) - chi2_F) and its p-value.

    When every dataset ranks the methods identically the denominator is 0: F is infinite and
    the p-value 0.
    """
    k, n = _check_counts(n_methods, n_datasets)
    if n < 2:
        return math.nan, math.nan
    denominator = n * (k - 1) - chi2
    if denominator <= 1e-12 * n * (k - 1):
        return math.inf, 0.0
    f = (n - 1) * chi2 / denominator
    return float(f), float(_st.f.sf(f, k - 1, (k - 1) * (n - 1)))


@lru_cache(maxsize=128)
def nemenyi_q(n_methods: int, alpha: float = 0.05) -> float:
    """The Nemenyi q_alpha: the studentized range quantile (infinite df) over sqrt(2)."""
    k, _ = _check_counts(n_methods, 1)
    if not 0.0 < alpha < 1.0:
        raise InputError(f"`alpha` must be in (0, 1), got {alpha}; use e.g. 0.05.")
    return float(_st.studentized_range.ppf(1.0 - alpha, k, np.inf) / math.sqrt(2.0))


def critical_difference(n_methods: int, n_datasets: int, alpha: float = 0.05) -> float:
    """Nemenyi critical difference CD = q_alpha sqrt(k (k + 1) / (6 N)) (Demšar 2006)."""
    k, n = _check_counts(n_methods, n_datasets)
    return nemenyi_q(k, alpha) * math.sqrt(k * (k + 1) / (6.0 * n))


def friedman_test(ranks: np.ndarray, alpha: float = 0.05) -> FriedmanResult:
    """Friedman, Iman-Davenport and Nemenyi on a rank matrix (datasets x methods).

    The Friedman statistic is corrected for ties as ``scipy.stats.friedmanchisquare`` does:
    the uncorrected statistic divided by 1 - sum(t^3 - t) / (N (k^3 - k)), summed over the
    groups of tied ranks t within each row; without ties it equals Demšar's formula.

    Parameters
    ----------
    ranks : array of shape (n_datasets, n_methods)
        Ranks within each row, 1 = best, ties averaged.
    alpha : float, default=0.05
        Level of the Nemenyi critical difference.

    Returns
    -------
    FriedmanResult
    """
    r = np.asarray(ranks, dtype=float)
    if r.ndim != 2:
        raise InputError(f"the rank matrix must be 2-D (datasets x methods), got {r.ndim}-D.")
    n, k = r.shape
    _check_counts(k, n)
    mean_ranks = r.mean(axis=0)
    chi2 = friedman_chi2_from_mean_ranks(mean_ranks, n)
    ties = 0.0
    for row in r:
        _, counts = np.unique(row, return_counts=True)
        ties += float(np.sum(counts.astype(float) ** 3 - counts))
    correction = 1.0 - ties / (n * (k**3 - k))
    if correction <= 0.0:  # every row entirely tied: no evidence of any difference
        chi2, p = 0.0, 1.0
    else:
        chi2 /= correction
        p = float(_st.chi2.sf(chi2, k - 1))
    f, fp = iman_davenport(chi2, n, k)
    return FriedmanResult(
        friedman_chi2=float(chi2),
        p_value=p,
        iman_davenport_f=f,
        iman_davenport_p=fp,
        critical_difference=critical_difference(k, n, alpha),
        mean_ranks=mean_ranks,
        n_datasets=n,
        n_methods=k,
    )
