"""Per-point quality: each point's Q_NX(K) and its share of trustworthiness and continuity.

A global criterion is a mean over points; keeping each point's term shows where an embedding
tears (low continuity: input neighbours sent far apart) and where it glues (low
trustworthiness: far points brought together). The terms are scaled so that their mean over
the points is the global value:

- Q_NX(K, i) = |N_K^X(i) ∩ N_K^Y(i)| / K, whose mean over i is Q_NX(K) (Lee & Verleysen
  2009);
- t_i(k) = 1 - 2 / (k (2n - 3k - 1)) sum_{j in U_k(i)} (r_X(i, j) - k), whose mean is T(k)
  (Venna & Kaski 2001), and c_i(k) likewise with the spaces swapped, whose mean is C(k).

Mokbel, Lueks, Gisbrecht & Hammer (2013) study such point-wise contributions of the
co-ranking criteria. Above the size threshold the terms are computed for the same random
query rows as the sampled global criteria, so their mean is the sampled estimate exactly.

References
----------
.. [1] J. A. Lee and M. Verleysen, "Quality assessment of dimensionality reduction:
   rank-based criteria", Neurocomputing 72(7-9), pp. 1431-1443, 2009.
   :doi:`10.1016/j.neucom.2008.12.017`
.. [2] B. Mokbel, W. Lueks, A. Gisbrecht and B. Hammer, "Visualizing the quality of
   dimensionality reduction", Neurocomputing 112, pp. 109-123, 2013.
   :doi:`10.1016/j.neucom.2012.11.046`
.. [3] J. Venna and S. Kaski, "Neighborhood preservation in nonlinear projection methods: an
   experimental study", ICANN 2001, LNCS 2130, pp. 485-491. :doi:`10.1007/3-540-44668-0_68`
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from lowdim.errors import InputError
from lowdim.metrics._checks import check_pair
from lowdim.metrics._neighbors import EXACT_THRESHOLD, SAMPLE_SIZE, Neighbourhoods, sample_rows
from lowdim.metrics.neighbourhood import penalised_terms, tc_k_max

__all__ = [
    "PER_POINT_METRICS",
    "PointScores",
    "per_point_quality",
    "per_point_at",
    "per_point_ks",
]

# The criteria that have per-point terms, in the order their columns are written.
PER_POINT_METRICS = ("qnx", "trustworthiness", "continuity")


@dataclass
class PointScores:
    """Per-point criteria of one embedding.

    Attributes
    ----------
    rows : ndarray of int
        The rows the values belong to: every row in order when exact, else the sorted query
        rows of the sampled criteria.
    values : dict
        ``(metric, k) -> ndarray`` aligned with ``rows``; metric is one of
        ``PER_POINT_METRICS``.
    n_samples : int
        Rows of the embedding.
    notes : list of str
        K values skipped and why, and whether rows were sampled.
    """

    rows: np.ndarray
    values: dict[tuple[str, int], np.ndarray] = field(default_factory=dict)
    n_samples: int = 0
    notes: list[str] = field(default_factory=list)

    @property
    def sampled(self) -> bool:
        """True when the values cover only sampled query rows."""
        return self.rows.size < self.n_samples

    def columns(self) -> dict[str, np.ndarray]:
        """``{"metric@K": values over all rows}``, NaN at rows outside the sample."""
        out = {}
        for (metric, k), values in self.values.items():
            full = np.full(self.n_samples, np.nan)
            full[self.rows] = values
            out[f"{metric}@{k}"] = full
        return out


def _qnx_terms(nx: np.ndarray, ny: np.ndarray, k: int) -> np.ndarray:
    both = np.sort(np.concatenate([nx[:, :k], ny[:, :k]], axis=1), axis=1)
    return np.count_nonzero(both[:, 1:] == both[:, :-1], axis=1) / k


def per_point_ks(ks: int | Iterable[int], n: int) -> tuple[dict[str, list[int]], list[str]]:
    """The K of each per-point criterion within its range, and notes for those left out."""
    if isinstance(ks, numbers.Integral) and not isinstance(ks, bool):
        ks = [ks]
    wanted = []
    for k in ks:
        if isinstance(k, bool) or not isinstance(k, numbers.Integral) or k < 1:
            raise InputError(f"per-point K values must be positive ints, got {k!r}")
        wanted.append(int(k))
    wanted = sorted(set(wanted))
    limits = {"qnx": n - 1, "trustworthiness": tc_k_max(n), "continuity": tc_k_max(n)}
    chosen, notes = {}, []
    for metric in PER_POINT_METRICS:
        chosen[metric] = [k for k in wanted if k <= limits[metric]]
        dropped = [k for k in wanted if k > limits[metric]]
        if dropped:
            rule = "k <= n - 1" if metric == "qnx" else "k < n/2"
            notes.append(
                f"per-point {metric} skipped at k = {', '.join(map(str, dropped))}: needs "
                f"{rule}, and n = {n}"
            )
    return chosen, notes


def per_point_at(
    ctx: Neighbourhoods, ks: dict[str, list[int]]
) -> dict[tuple[str, int], np.ndarray]:
    """Per-point terms at the query rows ``ctx.rows`` from the shared neighbour structure."""
    n, rows = ctx.n, ctx.rows
    out: dict[tuple[str, int], np.ndarray] = {}
    for k in ks.get("qnx", []):
        out[("qnx", k)] = _qnx_terms(ctx.nx[rows], ctx.ny[rows], k)
    for metric, ranks_of in (("trustworthiness", ctx.ranks_in_x), ("continuity", ctx.ranks_in_y)):
        wanted = ks.get(metric, [])
        if wanted:
            ranks = ranks_of(max(wanted))
            for k in wanted:
                out[(metric, k)] = penalised_terms(ranks, n, k)
    return out


def per_point_quality(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    ks: int | Iterable[int] = 10,
    exact_threshold: int = EXACT_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
    random_state: int | None = 0,
) -> PointScores:
    """Each point's Q_NX(K), trustworthiness term and continuity term for embedding Y of X.

    Parameters
    ----------
    X : array-like of shape (n, D)
        The input data.
    Y : array-like of shape (n, d)
        The embedding.
    ks : int or iterable of int, default=10
        Neighbourhood sizes; a K outside a criterion's range (k < n/2 for trustworthiness
        and continuity, k <= n - 1 for Q_NX) is skipped with a note.
    exact_threshold : int, default=10000
        Every row up to this n; above it, ``sample_size`` random query rows, the same ones
        :func:`lowdim.metrics.score_embedding` uses with the same seed.
    sample_size : int, default=2000
    random_state : int or None, default=0
        Seed for the query rows.

    Returns
    -------
    PointScores
        ``values[(metric, k)]`` at ``rows``; the mean of each over all rows is the global
        criterion (over sampled rows, the sampled estimate).
    """
    X, Y = check_pair(X, Y, "per_point_quality")
    n = X.shape[0]
    chosen, notes = per_point_ks(ks, n)
    largest = max((k for values in chosen.values() for k in values), default=1)
    rows = sample_rows(n, exact_threshold, sample_size, random_state)
    ctx = Neighbourhoods(X, Y, k_lists=largest, rows=rows)
    if rows is not None:
        notes.append(
            f"per-point values at {rows.size} random rows of {n} (n is above the exact "
            f"threshold {exact_threshold}; seed {random_state})"
        )
    return PointScores(rows=ctx.rows, values=per_point_at(ctx, chosen), n_samples=n, notes=notes)
