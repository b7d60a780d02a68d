"""The one analysis engine: from a results store to the :class:`Analysis` every output renders.

:func:`analyse` reads the store and its settings record and computes, once: per-block means
and spreads, ranks within blocks, the order of the configurations (mean rank on the
selection, then the one tie-break rule), the winner, the tuned view, gaps to the best, and the
tests of each criterion: Friedman (exact, Monte Carlo or asymptotic, as
:mod:`lowdim.analysis.stats` decides), the Nemenyi critical difference, and Wilcoxon
signed-rank tests of the winner against every other configuration with Holm's correction,
each with its effect size. report.html, leaderboard.csv|md|tex, stats.json, scores.csv, the
terminal summary of ``run`` and the recommendation of ``compare`` render this object; none of
them ranks or tests anything itself.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from lowdim.analysis import stats
from lowdim.analysis.breakdown import BREAKDOWN_FRACTION, breakdown_table
from lowdim.analysis.curves import bandwidth_curves, rnx_curves, scaling_stops, scaling_table
from lowdim.analysis.ranking import (
    gaps_to_best,
    natural_key,
    ordered,
    overall_summary,
    positions,
    rank_wide,
    summarise,
    tuned_summary,
    wide_means,
)
from lowdim.analysis.results import Results, criterion_table, load_results
from lowdim.analysis.stability import seed_stability
from lowdim.errors import InputError, suggestion
from lowdim.run.settings import OVERALL, Settings, criterion_key

__all__ = ["Pair", "CriterionTests", "Analysis", "analyse", "analyse_folder"]


@dataclass(frozen=True)
class Pair:
    """The winner against one other configuration on one criterion (Wilcoxon signed-rank).

    ``median_difference`` is oriented so that a positive value favours the winner, in the
    criterion's units (in ranks for :data:`~lowdim.run.settings.OVERALL`).
    """

    winner: str
    other: str
    n_blocks: int
    statistic: float
    p_value: float
    p_holm: float
    method: str
    median_difference: float


@dataclass(frozen=True)
class CriterionTests:
    """Everything tested on one criterion over the blocks."""

    key: str
    higher_is_better: bool
    n_blocks: int
    n_configurations: int
    mean_ranks: pd.Series
    friedman: stats.FriedmanResult | None
    q_alpha: float | None
    critical_difference: float | None
    pairs: tuple[Pair, ...] = ()
    alpha: float = 0.05

    @property
    def rejects(self) -> bool:
        """Whether Friedman's test rejects at ``alpha`` (False when it could not be run)."""
        return self.friedman is not None and self.friedman.p_value < self.alpha

    def pair(self, other: str) -> Pair | None:
        for p in self.pairs:
            if p.other == other:
                return p
        return None


@dataclass(frozen=True)
class Confirmation:
    """The leading configurations refitted on the whole file (or its largest sample).

    Attributes
    ----------
    dataset : str
        The confirmation's dataset label (it says how many rows).
    rows : int
        Rows the configurations were fitted on.
    resample_order, whole_order : list of str
        The confirmed configurations in the resamples' order and in the whole file's (by the
        same selection, then the same tie-break rule).
    values : DataFrame
        Configuration x headline criterion: the whole-file values.
    disparity : dict
        Configuration -> Procrustes disparity between its fit on the first resample extended
        to every row and its whole-file fit (for configurations with a ``transform``).
    failures : list of (configuration, status, message)
    extendable : tuple of str
        The configurations that have an out-of-sample ``transform`` (an extension was run).
    """

    dataset: str
    rows: int
    resample_order: list[str]
    whole_order: list[str]
    values: pd.DataFrame
    disparity: dict[str, float]
    failures: list[tuple[str, str, str]]
    extendable: tuple[str, ...] = ()

    @property
    def held(self) -> bool:
        """Whether the whole file orders the confirmed configurations as the resamples did."""
        return self.whole_order == self.resample_order


@dataclass
class Analysis:
    """The results object: every number an output shows, computed once.

    Attributes
    ----------
    settings : Settings
        The run's settings record.
    results : Results
        The store read into data frames.
    table : DataFrame
        Long-form scores of finished jobs with labels and criterion keys.
    summary : DataFrame
        Block mean and spread per configuration and criterion, the overall criterion included.
    blocks : list of str
        The blocks of the tests (dataset labels, or resample labels of one file).
    order : list of str
        Every configuration, best first (selection, then the tie-break rule).
    position : dict
        Configuration -> its place (``"1"``, ``"=2"``).
    selection_ranks : Series
        Mean rank on the selection per configuration, in :attr:`order`.
    tests : dict
        Criterion key (and ``"overall"``) -> :class:`CriterionTests`.
    means, ranks : dict
        Criterion key -> block means, and ranks within blocks, laid out blocks x
        configurations (every configuration a column, in :attr:`order`).
    """

    settings: Settings
    results: Results
    table: pd.DataFrame
    summary: pd.DataFrame
    blocks: list[str]
    order: list[str]
    position: dict[str, str]
    selection_ranks: pd.Series
    tests: dict[str, CriterionTests]
    means: dict[str, pd.DataFrame]
    ranks: dict[str, pd.DataFrame]
    tuned: pd.DataFrame
    gaps: pd.DataFrame
    failures: pd.DataFrame
    breakdown: pd.DataFrame
    stability: pd.DataFrame
    bandwidth: pd.DataFrame
    scaling: pd.DataFrame
    scaling_fits: pd.DataFrame
    rnx: pd.DataFrame
    scaling_stops: pd.DataFrame
    fraction: float = BREAKDOWN_FRACTION
    notes: list[str] = field(default_factory=list)
    confirmation: Confirmation | None = None
    diagnoses: pd.DataFrame = field(default_factory=pd.DataFrame)
    published: pd.DataFrame = field(default_factory=pd.DataFrame)

    def spec_of(self, method: str) -> dict:
        """The method spec a configuration ran with: ``name`` (or ``import``) and parameters."""
        jobs = self.results.jobs
        row = jobs[jobs["config"] == method].iloc[0]
        family = str(row["family"])
        key = "import" if ":" in family else "name"
        return {key: family, **row["config_spec"]}

    @property
    def effect(self) -> str:
        """The criterion in whose units effects are stated: the selection, or the first
        headline criterion when the selection is the overall rank (a rank has no units)."""
        if self.selection != OVERALL:
            return self.selection
        return self.headline[0] if self.headline else ""

    def first_share(self) -> pd.Series:
        """For each configuration, the share of blocks where it ranks first on the selection
        (a tie for first counts for each tied configuration), in :attr:`order`."""
        ranks = self.ranks.get(self.selection)
        if ranks is None or ranks.empty:
            return pd.Series(0.0, index=self.order)
        best = ranks.min(axis=1)
        first = ranks.eq(best, axis=0)
        return first.mean(axis=0).reindex(self.order).fillna(0.0)

    def lead(self) -> pd.Series:
        """The winner's lead over the runner-up in each block, in :attr:`effect`'s units
        (positive when the winner is better); blocks where either has no value are left
        out."""
        key, runner = self.effect, self.runner_up
        means = self.means.get(key)
        if runner is None or means is None or self.winner not in means:
            return pd.Series(dtype=float)
        both = means[[self.winner, runner]].dropna()
        sign = 1.0 if self.directions.get(key, True) else -1.0
        return sign * (both[self.winner] - both[runner])

    @property
    def selection(self) -> str:
        return self.settings.selection

    @property
    def winner(self) -> str | None:
        """The first configuration; None when no configuration has a rank (none finished)."""
        if not self.order or not math.isfinite(self.selection_ranks.iloc[0]):
            return None
        return self.order[0]

    @property
    def runner_up(self) -> str | None:
        """The second configuration; None when it has no rank."""
        if len(self.order) < 2 or not math.isfinite(self.selection_ranks.iloc[1]):
            return None
        return self.order[1]

    @property
    def directions(self) -> dict[str, bool]:
        """Criterion key -> higher is better, the overall criterion included."""
        return {**self.settings.directions, OVERALL: False}

    @property
    def headline(self) -> list[str]:
        """The headline criteria that have scores in this run."""
        present = set(self.summary["criterion"])
        return [k for k in self.settings.headline if k in present]

    @property
    def criteria(self) -> list[str]:
        """Every ranked criterion with scores, in the record's order, overall first."""
        present = set(self.summary["criterion"])
        keys = [OVERALL] if OVERALL in present else []
        return keys + [c.key for c in self.settings.criteria if c.key in present]

    def family(self, method: str) -> str:
        return self.settings.families.get(method) or _family_of(self.results, method)

    def leaders(self, size: int = 4) -> list[str]:
        """The configurations a reader sees first: the winner, the runner-up, the best PCA,
        then the best configuration of each other method family until ``size`` are named."""
        out = list(self.order[:2])
        out += [m for m in self.order if self.family(m) == "pca"][:1]
        out = list(dict.fromkeys(out))
        shown = {self.family(m) for m in out}
        for m in self.order:
            if len(out) >= size:
                break
            if self.family(m) not in shown:
                out.append(m)
                shown.add(self.family(m))
        return out

    def tied_with_winner(self) -> list[str]:
        """Configurations whose mean rank on the selection equals the winner's."""
        if not self.order:
            return []
        first = round(float(self.selection_ranks.iloc[0]), 9)
        return [m for m, r in self.selection_ranks.items() if round(float(r), 9) == first]


def _family_of(results: Results, method: str) -> str:
    hit = results.jobs.loc[results.jobs["config"] == method, "family"]
    return str(hit.iloc[0]) if len(hit) else method


def _pairs(wide: pd.DataFrame, higher: bool, winner: str, others: list[str]) -> tuple[Pair, ...]:
    """Wilcoxon signed-rank of the winner against each other configuration on the block means
    ``wide``, Holm over those comparisons. Blocks where either side has no value are left out
    of a pair."""
    if winner not in wide:
        return ()
    raw = []
    for other in others:
        if other not in wide:
            continue
        both = wide[[winner, other]].dropna()
        if len(both) < 1:
            continue
        a, b = both[winner].to_numpy(float), both[other].to_numpy(float)
        sign = 1.0 if higher else -1.0
        raw.append((other, len(both), stats.wilcoxon_signed_rank(sign * a, sign * b)))
    if not raw:
        return ()
    adjusted = stats.holm(np.array([r.p_value for _, _, r in raw]))
    return tuple(
        Pair(
            winner=winner,
            other=other,
            n_blocks=n,
            statistic=r.statistic,
            p_value=r.p_value,
            p_holm=float(p),
            method=r.method,
            median_difference=r.median_difference,
        )
        for (other, n, r), p in zip(raw, adjusted, strict=True)
    )


def _tests(
    wide: pd.DataFrame,
    key: str,
    higher: bool,
    methods: list[str],
    winner: str | None,
    settings: Settings,
    families: dict[str, str],
    with_pairs: bool,
) -> CriterionTests:
    alpha = settings.alpha
    ranks = rank_wide(wide, higher, methods)
    ranks = ranks.loc[:, ranks.notna().any(axis=0)]
    n, k = ranks.shape
    friedman, q, cd = None, None, None
    if n >= 1 and k >= 2:
        friedman = stats.friedman(ranks.to_numpy(float))
        q = stats.nemenyi_q(k, alpha)
        cd = stats.critical_difference(k, n, alpha)
    pairs: tuple[Pair, ...] = ()
    if with_pairs and winner is not None and k >= 2:
        pairs = _pairs(wide, higher, winner, [m for m in methods if m != winner])
    return CriterionTests(
        key=key,
        higher_is_better=higher,
        n_blocks=n,
        n_configurations=k,
        mean_ranks=_in_order(ranks.mean(axis=0), families, settings),
        friedman=friedman,
        q_alpha=q,
        critical_difference=cd,
        pairs=pairs,
        alpha=alpha,
    )


def _with_selection(settings: Settings, selection: str | None, where: str) -> Settings:
    """The record with another selection (``lowdim report --select``), checked against it."""
    if selection is None or selection == settings.selection:
        return settings
    keys = [OVERALL] + [c.key for c in settings.criteria]
    if selection not in keys:
        raise InputError(
            f"the selection criterion {selection!r} is not among the criteria ranked in "
            f"{where}{suggestion(selection, keys)}; give one of {', '.join(keys)}"
        )
    return replace(settings, selection=selection)


def _in_order(mean_ranks: pd.Series, families: dict[str, str], settings: Settings) -> pd.Series:
    """Mean ranks best first, equal ones in the tie-break rule's order."""
    return mean_ranks[ordered(mean_ranks, families, settings.simpler_first)]


def analyse(results: Results, *, selection: str | None = None) -> Analysis:
    """Compute the :class:`Analysis` of a loaded store.

    ``selection`` overrides the record's selection (a criterion key, or ``"overall"``).
    """
    settings = _with_selection(results.settings, selection, repr(str(results.out_dir)))
    results = replace(results, settings=settings)
    directions = settings.directions
    every_score = criterion_table(results)
    table = every_score[every_score["criterion"].isin(directions)]
    summary = summarise(table)
    methods = sorted(results.jobs["config"].unique())
    families = {m: _family_of(results, m) for m in methods}
    overall = overall_summary(summary, settings.headline, directions, methods, families)
    summary = pd.concat([summary, overall], ignore_index=True) if len(overall) else summary
    all_directions = {**directions, OVERALL: False}
    selection = settings.selection
    higher = all_directions.get(selection, False)
    means = wide_means(summary)
    empty = pd.DataFrame(columns=methods, dtype=float)
    selection_ranks = rank_wide(means.get(selection, empty), higher, methods).mean(axis=0)
    # a configuration with no finished job anywhere still takes a place, after the others
    selection_ranks = selection_ranks.reindex(methods).fillna(math.inf)
    order = ordered(selection_ranks, families, settings.simpler_first)
    selection_ranks = selection_ranks[order]
    place = dict(zip(order, positions(selection_ranks.to_list()), strict=True))
    winner = order[0] if order and math.isfinite(selection_ranks.iloc[0]) else None
    present = set(summary["criterion"])
    tested = [OVERALL] + [c.key for c in settings.criteria]
    with_pairs = {selection, OVERALL, *settings.headline}
    means = {k: v.reindex(columns=order) for k, v in means.items()}
    means.setdefault(selection, empty.reindex(columns=order))  # no job finished: no blocks
    ranks = {k: rank_wide(v, all_directions.get(k, True), order) for k, v in means.items()}
    tests = {
        key: _tests(
            means[key],
            key,
            all_directions[key],
            methods,
            winner,
            settings,
            families,
            key in with_pairs,
        )
        for key in tested
        if key in present
    }
    jobs = results.jobs
    failures = jobs[jobs["status"] != "ok"][
        ["job_id", "data", "config", "family", "seed", "status", "error"]
    ].rename(columns={"data": "dataset", "config": "method"})
    headline = {k: v for k, v in all_directions.items() if k in settings.headline}
    points, fits = scaling_table(results)
    blocks = sorted(set(summary["dataset"]), key=natural_key)
    return Analysis(
        settings=settings,
        results=results,
        table=table,
        summary=summary,
        blocks=blocks,
        order=order,
        position=place,
        selection_ranks=selection_ranks,
        tests=tests,
        means=means,
        ranks=ranks,
        tuned=tuned_summary(summary, selection, higher, settings.simpler_first),
        gaps=gaps_to_best(summary, all_directions),
        failures=failures.reset_index(drop=True),
        breakdown=breakdown_table(results, table, headline, BREAKDOWN_FRACTION),
        stability=seed_stability(results),
        bandwidth=bandwidth_curves(results, every_score, _curve_criterion(settings, present)),
        scaling=points,
        scaling_fits=fits,
        rnx=rnx_curves(every_score),
        scaling_stops=scaling_stops(results),
        confirmation=_confirmation(results, order, settings, families),
        diagnoses=_diagnoses(results),
        published=_published(settings, summary),
    )


DIAGNOSIS_COLUMNS = [
    "job_id",
    "dataset",
    "method",
    "seed",
    "kind",
    "value",
    "threshold",
    "explanation",
    "coordinate",
    "component",
    "size",
]


def _diagnoses(results: Results) -> pd.DataFrame:
    """The degeneracies the runner found in each finished job's embedding, one row each."""
    jobs = results.jobs
    if "diagnoses" not in jobs:
        return pd.DataFrame(columns=DIAGNOSIS_COLUMNS)
    rows = []
    for job in jobs[jobs["status"] == "ok"].itertuples():
        text = job.diagnoses
        if not isinstance(text, str) or not text:
            continue
        for found in json.loads(text):
            rows.append(
                {"job_id": job.job_id, "dataset": job.data, "method": job.config, "seed": job.seed}
                | found
            )
    return pd.DataFrame(rows, columns=DIAGNOSIS_COLUMNS)


PUBLISHED_COLUMNS = [
    "dataset",
    "method",
    "criterion",
    "published",
    "measured",
    "difference",
    "source",
    "table",
    "note",
]


def _published(settings: Settings, summary: pd.DataFrame) -> pd.DataFrame:
    """Each published figure beside the run's own (the block mean over seeds) and their
    difference, measured minus published; NaN where the run has no such cell."""
    if not settings.published:
        return pd.DataFrame(columns=PUBLISHED_COLUMNS)
    means = summary.set_index(["dataset", "method", "criterion"])["mean"]
    rows = []
    for row in settings.published:
        key = (row["dataset"], row["method"], row["criterion"])
        measured = float(means.get(key, math.nan))
        rows.append(
            {
                "dataset": row["dataset"],
                "method": row["method"],
                "criterion": row["criterion"],
                "published": float(row["value"]),
                "measured": measured,
                "difference": measured - float(row["value"]),
                "source": row["source"],
                "table": row["table"],
                "note": row.get("note", ""),
            }
        )
    return pd.DataFrame(rows, columns=PUBLISHED_COLUMNS)


EXTENDED = ", extended]"
"""The end of the label of a confirmation job that extends a subsample fit to every row."""


def _confirmation(
    results: Results, order: list[str], settings: Settings, families: dict[str, str]
) -> Confirmation | None:
    """Compare the whole-file fits of the confirmation run with the resamples' order."""
    from scipy.spatial import procrustes

    jobs = results.confirmation
    if jobs.empty:
        return None
    base = jobs[~jobs["config"].str.endswith(EXTENDED)]
    ok = base[base["status"] == "ok"]
    failures = [
        (str(r.config), str(r.status), " ".join(str(r.error or "").split()))
        for r in jobs[jobs["status"] != "ok"].itertuples()
    ]
    scores = results.confirmation_scores.merge(ok[["job_id", "config"]], on="job_id")
    scores["criterion"] = [
        criterion_key(m, k) for m, k in zip(scores["metric"], scores["k"], strict=True)
    ]
    values = scores.pivot_table(
        index="config", columns="criterion", values="value", aggfunc="mean"
    )
    configs = [m for m in order if m in set(base["config"])]
    keys = [k for k in settings.headline if k in values.columns]
    wide = {k: values[[k]].T.rename(index={k: "whole"}) for k in keys}
    ranks = [rank_wide(wide[k], settings.directions[k], configs) for k in keys]
    if ranks and settings.selection in keys:
        mean_rank = ranks[keys.index(settings.selection)].iloc[0]
    elif ranks:
        mean_rank = pd.concat(ranks).mean(axis=0)
    else:
        mean_rank = pd.Series(math.inf, index=configs)
    whole_order = ordered(
        mean_rank.reindex(configs).fillna(math.inf), families, settings.simpler_first
    )
    disparity = {}
    for config in configs:
        whole = ok.loc[ok["config"] == config, "job_id"]
        extended = jobs[
            jobs["config"].str.startswith(f"{config} [fitted on") & (jobs["status"] == "ok")
        ]
        if extended.empty or whole.empty:
            continue
        a = results.embedding(whole.iloc[0])
        b = results.embedding(extended["job_id"].iloc[0])
        if a is not None and b is not None:
            try:
                disparity[config] = float(procrustes(a, b)[2])
            except ValueError:  # a constant embedding has no shape to align
                disparity[config] = math.nan
    return Confirmation(
        dataset=str(base["data"].iloc[0]) if len(base) else "",
        rows=int(ok["n_samples"].max()) if len(ok) else 0,
        resample_order=configs,
        whole_order=whole_order,
        values=values.reindex(index=configs, columns=keys),
        disparity=disparity,
        failures=failures,
        extendable=tuple(
            m for m in configs if jobs["config"].str.startswith(f"{m} [fitted on").any()
        ),
    )


def _curve_criterion(settings: Settings, present: set[str]) -> str:
    """The criterion drawn on the bandwidth curves: the selection, or the first headline one
    when the selection is the overall rank (a rank says nothing along one family's sweep)."""
    if settings.selection != OVERALL:
        return settings.selection
    return next((k for k in settings.headline if k in present), "")


def analyse_folder(out_dir, *, selection: str | None = None) -> Analysis:
    """:func:`analyse` of the store in ``out_dir``."""
    return analyse(load_results(out_dir), selection=selection)
