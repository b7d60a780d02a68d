"""Score one embedding on many criteria from one shared neighbour computation."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from lowdim.errors import InputError
from lowdim.metrics import _input_memo
from lowdim.metrics._checks import check_k, check_labels, check_pair, check_truth
from lowdim.metrics._neighbors import (
    EXACT_THRESHOLD,
    FULL_RANK_THRESHOLD,
    SAMPLE_SIZE,
    Estimate,
    Neighbourhoods,
    sample_rows,
)
from lowdim.metrics._registry import Metric, get_metric, metric_names
from lowdim.metrics.coranking import (
    lcmc_from_qnx,
    qnx_from_lists,
    rnx_auc_estimate,
    rnx_from_qnx,
    rnx_grid,
)
from lowdim.metrics.distances import (
    PAIR_POINTS,
    centred_distance_ranks,
    pair_subset,
    spearman_of_ranks,
    stress_parts,
)
from lowdim.metrics.labels import check_classes, knn_accuracy_at, silhouette_estimate
from lowdim.metrics.neighbourhood import continuity_at, knn_recall_at, trustworthiness_at
from lowdim.metrics.per_point import per_point_at, per_point_ks
from lowdim.metrics.truth import procrustes_disparity, procrustes_mismatch

__all__ = ["Scores", "score_embedding", "RNX_CURVE_MAX"]

# The R_NX(K) curve is reported on a log grid of K up to this (or n - 2).
RNX_CURVE_MAX = 128
# Criteria estimated from query rows above the exact threshold, and the one above the
# full-rank threshold.
SAMPLED = ("trustworthiness", "continuity", "silhouette")
FULL_RANK = ("rnx_auc",)
# Criteria computed from all pairs of a random subset above ``pair_points``.
PAIRWISE = ("distance_spearman", "stress", "truth_spearman")


@dataclass
class Scores:
    """The criteria of one embedding.

    Attributes
    ----------
    values : list of (metric, k, value)
        ``k`` is 0 for criteria that take no K. ``rnx`` also appears at every K of a log grid
        (1, 2, 3, 4, 6, 8, 11, ...) for the R_NX(K) curve.
    notes : list of str
        Criteria skipped and why, and which were estimated from samples.
    sample_size : int or None
        Query points used by the sampled criteria; None when every criterion is exact.
    standard_errors : dict
        ``(metric, k) -> standard error`` of each sampled estimate.
    per_point : dict
        With ``per_point_k``: ``(metric, k) -> ndarray`` of per-point Q_NX, trustworthiness
        and continuity terms (metric ``"qnx"``, ``"trustworthiness"``, ``"continuity"``),
        aligned with ``per_point_rows``; their mean is the global value (see
        :mod:`lowdim.metrics.per_point`). Empty otherwise.
    per_point_rows : ndarray of int or None
        The rows the per-point values belong to: every row in order when trustworthiness is
        exact, else the sampled query rows. None when no per-point values were asked for.
    """

    values: list[tuple[str, int, float]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    sample_size: int | None = None
    standard_errors: dict[tuple[str, int], float] = field(default_factory=dict)
    per_point: dict[tuple[str, int], np.ndarray] = field(default_factory=dict)
    per_point_rows: np.ndarray | None = None

    def get(self, metric: str, k: int = 0) -> float:
        """The value of ``metric`` at ``k``; KeyError when it was not computed."""
        for name, kk, value in self.values:
            if name == metric and kk == k:
                return value
        raise KeyError((metric, k))

    def as_dict(self) -> dict[tuple[str, int], float]:
        """``{(metric, k): value}``."""
        return {(name, k): value for name, k, value in self.values}


class _Skip(Exception):
    """A criterion that does not apply to this data; the message says why."""


@dataclass
class _Job:
    X: np.ndarray
    Y: np.ndarray
    ctx: Neighbourhoods
    labels: tuple[np.ndarray, int] | None
    truth: np.ndarray | None
    subset: np.ndarray | None
    ks: dict[str, list[int]]
    raw_labels: Any
    raw_truth: Any
    cache: dict[str, Any] = field(default_factory=dict)

    def qnx(self) -> np.ndarray:
        if "q" not in self.cache:
            self.cache["q"] = qnx_from_lists(self.ctx.nx, self.ctx.ny)
        return self.cache["q"]

    def distance_ranks(self, which: str) -> np.ndarray:
        # The embedding's distance ranks serve distance_spearman and truth_spearman alike.
        key = f"ranks_{which}"
        if key not in self.cache:
            memo = self.ctx.memo if which == "X" else None
            kept_as = ("distance_ranks", None if self.subset is None else self.subset.tobytes())
            if memo is not None and kept_as in memo:
                self.cache[key] = memo[kept_as]
            else:
                Z = {"X": self.X, "Y": self.Y, "truth": self.truth}[which]
                self.cache[key] = centred_distance_ranks(Z, self.subset)
                if memo is not None:
                    self.cache[key].setflags(write=False)
                    memo[kept_as] = self.cache[key]
        return self.cache[key]

    def need_labels(self) -> tuple[np.ndarray, int]:
        if self.labels is None:
            raise _Skip("no labels")
        return self.labels

    def need_truth(self) -> np.ndarray:
        if self.truth is None:
            raise _Skip("no ground truth")
        return self.truth


def _from_q(job: _Job, name: str, transform: Callable) -> dict[int, Estimate]:
    q = job.qnx()
    n = job.ctx.n
    return {k: Estimate(float(transform(q[k - 1], n, k))) for k in job.ks[name]}


def _silhouette(job: _Job) -> Estimate:
    codes, n_classes = job.need_labels()
    try:
        check_classes(n_classes, job.ctx.n, "silhouette")
    except InputError as exc:
        raise _Skip(f"{n_classes} distinct label(s)") from exc
    rows = job.ctx.rows if job.ctx.sampled else None
    return silhouette_estimate(job.Y, codes, n_classes, rows)


def _truth_spearman(job: _Job) -> Estimate:
    job.need_truth()
    ranks = job.distance_ranks("truth"), job.distance_ranks("Y")
    return Estimate(spearman_of_ranks(*ranks, "truth_spearman"))


def _procrustes(job: _Job) -> Estimate:
    truth = job.need_truth()
    problem = procrustes_mismatch(truth, job.Y)
    if problem is not None:
        raise _Skip(problem)
    return Estimate(procrustes_disparity(truth, job.Y))


# Criteria with K return {k: Estimate}; the others one Estimate.
_BUILT_IN: dict[str, Callable[[_Job], dict[int, Estimate] | Estimate]] = {
    "trustworthiness": lambda job: trustworthiness_at(job.ctx, job.ks["trustworthiness"]),
    "continuity": lambda job: continuity_at(job.ctx, job.ks["continuity"]),
    "qnx": lambda job: _from_q(job, "qnx", lambda q, n, k: q),
    "rnx": lambda job: _from_q(job, "rnx", rnx_from_qnx),
    "lcmc": lambda job: _from_q(job, "lcmc", lcmc_from_qnx),
    "rnx_auc": lambda job: rnx_auc_estimate(job.ctx),
    "knn_recall": lambda job: knn_recall_at(job.ctx, job.ks["knn_recall"]),
    "knn_accuracy": lambda job: knn_accuracy_at(
        job.ctx, job.need_labels()[0], job.ks["knn_accuracy"]
    ),
    "silhouette": _silhouette,
    "distance_spearman": lambda job: Estimate(
        spearman_of_ranks(job.distance_ranks("X"), job.distance_ranks("Y"), "distance_spearman")
    ),
    "stress": lambda job: Estimate(stress_parts(job.X, job.Y, job.subset).scale_invariant),
    "truth_spearman": _truth_spearman,
    "truth_procrustes": _procrustes,
}


def _plugin(job: _Job, metric: Metric) -> dict[int, Estimate] | Estimate:
    # A criterion registered from outside: call its function, once per K if it takes one.
    if metric.needs == "labels":
        job.need_labels()
    if metric.needs == "truth":
        job.need_truth()
    kwargs = {"labels": job.raw_labels, "truth": job.raw_truth}
    if not metric.uses_k:
        return Estimate(float(metric.fn(job.X, job.Y, **kwargs)))
    return {
        k: Estimate(float(metric.fn(job.X, job.Y, k=k, **kwargs))) for k in job.ks[metric.name]
    }


def _resolve_names(metrics: Iterable[str] | None, notes: list[str]) -> list[Metric]:
    if metrics is None:
        every = [get_metric(name) for name in metric_names()]
        return [metric for metric in every if not metric.measured_by_runner]
    if isinstance(metrics, str):
        metrics = [metrics]
    chosen = []
    for name in dict.fromkeys(metrics):
        metric = get_metric(name)
        if metric.measured_by_runner:
            notes.append(f"{name}: recorded by the runner, not computed from the embedding")
        else:
            chosen.append(metric)
    return chosen


def _resolve_ks(ks: Sequence[int], n: int) -> list[int]:
    # Only the type and k >= 1 are errors here; each criterion's own range gives notes.
    if isinstance(ks, int | np.integer):
        ks = [ks]
    checked = [check_k(k, n, "score_embedding", sys.maxsize, "") for k in ks]
    return sorted(set(checked))


def score_embedding(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    metrics: Iterable[str] | None = None,
    ks: Sequence[int] = (5, 10, 30),
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
    random_state: int | None = 0,
    exact_threshold: int = EXACT_THRESHOLD,
    full_rank_threshold: int = FULL_RANK_THRESHOLD,
    sample_size: int = SAMPLE_SIZE,
    pair_points: int = PAIR_POINTS,
    rnx_curve_max: int = RNX_CURVE_MAX,
    per_point_k: int | Sequence[int] | None = None,
) -> Scores:
    """Compute the requested criteria of embedding Y of X, sharing one neighbour computation.

    The K nearest lists of both spaces are computed once, for the largest K any criterion
    needs; Q_NX, R_NX and LCMC at every K up to it come from those lists alone, and
    trustworthiness and continuity at every K from one pass of exact ranks.

    Parameters
    ----------
    X : array-like of shape (n, D)
        The input data.
    Y : array-like of shape (n, d)
        The embedding; NaN or infinity raises InputError.
    metrics : iterable of str, default=None
        Criteria to compute (names from :func:`metric_names`); None computes every one the
        data allows. Criteria the data does not allow (no labels, no truth, K out of range,
        truth and embedding of different dimension) are skipped with a note.
    ks : sequence of int, default=(5, 10, 30)
        Neighbourhood sizes for the criteria that take K.
    labels : array-like of shape (n,), default=None
        Class labels, for ``knn_accuracy`` and ``silhouette``.
    truth : array-like of shape (n, t), default=None
        Intrinsic coordinates, for ``truth_spearman`` and ``truth_procrustes``.
    random_state : int or None, default=0
        Seed for the sampled query points and pair subsets.
    exact_threshold : int, default=10000
        Trustworthiness, continuity and silhouette are exact up to this n; above it they are
        estimated from ``sample_size`` random query points against all points, with standard
        errors.
    full_rank_threshold : int, default=4000
        The same for rnx_auc, which needs every query point's full ranks in both spaces.
    sample_size : int, default=2000
        Query points used above the thresholds.
    pair_points : int, default=2000
        distance_spearman, stress and truth_spearman use all pairs up to this n, else all
        pairs among this many random points.
    rnx_curve_max : int, default=128
        Largest K of the log grid on which ``rnx`` is also reported.
    per_point_k : int or sequence of int, default=None
        Also keep each point's Q_NX(K), trustworthiness and continuity terms at these K, in
        ``Scores.per_point`` (whatever ``metrics`` says), for the same query rows as the
        sampled criteria. None (the default) computes none.

    Returns
    -------
    Scores
    """
    X, Y = check_pair(X, Y, "score_embedding")
    n = X.shape[0]
    notes: list[str] = []
    chosen = _resolve_names(metrics, notes)
    ks = _resolve_ks(ks, n)
    coded = None if labels is None else check_labels(labels, n, "score_embedding")
    T = None if truth is None else check_truth(truth, n, "score_embedding")

    per_metric: dict[str, list[int]] = {}
    for metric in chosen:
        if not metric.uses_k:
            continue
        high = metric.k_max(n) if metric.k_max is not None else n - 1
        per_metric[metric.name] = [k for k in ks if k <= high]
        dropped = [k for k in ks if k > high]
        if dropped:
            notes.append(
                f"{metric.name} skipped at k = {', '.join(map(str, dropped))}: needs "
                f"{metric.k_rule or 'k <= n - 1'}, and n = {n}"
            )
    if "rnx" in per_metric:
        grid = rnx_grid(min(n - 2, rnx_curve_max))
        per_metric["rnx"] = sorted(set(per_metric["rnx"]) | set(grid))
    listed = [k for name, values in per_metric.items() if name in _BUILT_IN for k in values]
    point_ks: dict[str, list[int]] = {}
    if per_point_k is not None:
        point_ks, point_notes = per_point_ks(per_point_k, n)
        notes.extend(point_notes)
        listed += [k for values in point_ks.values() for k in values]
    rows = sample_rows(n, exact_threshold, sample_size, random_state)
    full_rows = sample_rows(n, full_rank_threshold, sample_size, random_state)
    ctx = Neighbourhoods(
        X,
        Y,
        k_lists=max(listed, default=1),
        rows=rows,
        full_rows=full_rows,
        memo=_input_memo.lookup(X),
    )
    job = _Job(
        X=X,
        Y=Y,
        ctx=ctx,
        labels=coded,
        truth=T,
        subset=pair_subset(n, pair_points, random_state),
        ks=per_metric,
        raw_labels=labels,
        raw_truth=truth,
    )
    scores = Scores(notes=notes)
    if per_point_k is not None:
        _per_point(scores, ctx, point_ks, per_metric)
    skipped: dict[str, list[str]] = {}
    for metric in chosen:
        if metric.uses_k and not per_metric[metric.name]:
            continue
        compute = _BUILT_IN.get(metric.name)
        try:
            result = compute(job) if compute is not None else _plugin(job, metric)
        except _Skip as why:
            skipped.setdefault(str(why), []).append(metric.name)
            continue
        items = result.items() if isinstance(result, dict) else [(0, result)]
        for k, estimate in items:
            scores.values.append((metric.name, k, estimate.value))
            if estimate.standard_error is not None:
                scores.standard_errors[(metric.name, k)] = estimate.standard_error
    for why, names in skipped.items():
        notes.append(f"{', '.join(names)} skipped: {why}")
    done = {name for name, _, _ in scores.values}
    for group, query, threshold in (
        (SAMPLED, rows, exact_threshold),
        (FULL_RANK, full_rows, full_rank_threshold),
    ):
        sampled = [name for name in group if name in done]
        if query is not None and sampled:
            scores.sample_size = int(query.size)
            notes.append(
                f"{', '.join(sampled)} estimated from {query.size} random query points of {n} "
                f"(n is above the exact threshold {threshold}; seed {random_state}); "
                "standard errors are in standard_errors"
            )
    _note_pairs(scores, done, job.subset, n, pair_points, random_state)
    return scores


def _per_point(
    scores: Scores,
    ctx: Neighbourhoods,
    point_ks: dict[str, list[int]],
    per_metric: dict[str, list[int]],
) -> None:
    # Ranks once, to the largest K the global and the per-point terms need.
    for name, ranks in (("trustworthiness", ctx.ranks_in_x), ("continuity", ctx.ranks_in_y)):
        if point_ks.get(name):
            ranks(max(point_ks[name] + per_metric.get(name, [])))
    scores.per_point = per_point_at(ctx, point_ks)
    scores.per_point_rows = ctx.rows
    if ctx.sampled:
        scores.notes.append(
            f"per-point values at the {ctx.rows.size} query rows of the sampled criteria"
        )


def _note_pairs(
    scores: Scores,
    done: set[str],
    subset: np.ndarray | None,
    n: int,
    pair_points: int,
    random_state: int | None,
) -> None:
    paired = [name for name in PAIRWISE if name in done]
    if subset is not None and paired:
        scores.notes.append(
            f"{', '.join(paired)} computed on all pairs among {subset.size} random points of "
            f"{n} (n is above pair_points = {pair_points}; seed {random_state})"
        )
