"""Leaderboards from a results store: summaries over seeds, ranks, tuned views and statistics.

Everything here is computed from ``store.sqlite`` alone (the schema is in DEVELOPERS.md), so a
report can be rebuilt at any time. Vocabulary:

- a *criterion key* is ``"metric@K"`` for criteria that take a neighbourhood size K
  (e.g. ``"trustworthiness@10"``) and the bare metric name for the others (k = 0 in the
  store, e.g. ``"rnx_auc"``); :func:`criterion_key` and :func:`parse_criterion` convert;
- a *dataset* is a dataset spec without its seed, shown by its display label;
- a *configuration* is one method spec (a method with fixed parameters), shown by its label;
  a *method* (family) is the registry name the configurations share.

Directions (higher or lower is better) come from the metric registry; store rows whose
metric the registry does not know (e.g. a runner's ``bandwidth`` record) are not criteria
and are not ranked.
"""

from __future__ import annotations

import json
import math
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from lowdim.analysis.stats import friedman_test
from lowdim.errors import InputError

__all__ = [
    "STORE_NAME",
    "Results",
    "load_results",
    "criterion_key",
    "parse_criterion",
    "higher_is_better",
    "criterion_table",
    "summarise",
    "rank_table",
    "mean_ranks",
    "criteria_in",
    "headline_criteria",
    "overall_mean_ranks",
    "tuned_summary",
    "criterion_statistics",
    "significant_pairs",
    "leaderboard",
]

STORE_NAME = "store.sqlite"

# The criteria a reader looks at first, in this order; each K criterion at its middle K.
_HEADLINE = (
    "rnx_auc",
    "trustworthiness",
    "continuity",
    "knn_accuracy",
    "truth_spearman",
    "distance_spearman",
)
_COST = ("fit_seconds", "peak_mb")
# Keys that change with the job's seed rather than describing the spec itself.
_SEED_KEYS = ("seed", "random_state")


@dataclass(frozen=True)
class Results:
    """A results store read into data frames.

    Attributes
    ----------
    out_dir : Path
        The run's folder.
    jobs : DataFrame
        One row per job with the store's columns plus ``data`` (dataset display label, unique
        per spec without its seed), ``config`` (configuration display label, unique per method
        spec), ``family`` (method name), ``data_spec`` and ``config_spec`` (parameter dicts
        without seeds).
    scores : DataFrame
        ``job_id, metric, k, value``.
    runs : DataFrame
        The ``runs`` table (empty when the store has none).
    """

    out_dir: Path
    jobs: pd.DataFrame
    scores: pd.DataFrame
    runs: pd.DataFrame
    notes: list[str] = field(default_factory=list)

    def embedding_path(self, job_id: str) -> Path:
        """Where the runner keeps a job's embedding."""
        return self.out_dir / "embeddings" / f"{job_id}.npy"


def _read_table(con: sqlite3.Connection, name: str) -> pd.DataFrame:
    exists = con.execute(
        "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?", (name,)
    ).fetchone()
    if not exists:
        return pd.DataFrame()
    return pd.read_sql_query(f"SELECT * FROM {name}", con)


def _latest_suite_only(
    jobs: pd.DataFrame, scores: pd.DataFrame, planned: pd.DataFrame
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Keep the jobs the latest run planned, when the store records them.

    A folder keeps every job it ever ran, so a suite edited and run again leaves the jobs of
    its earlier form behind; the report speaks of the suite as it is now.
    """
    if planned.empty or jobs.empty or "job_id" not in planned:
        return jobs, scores
    latest = planned[planned["run_id"] == planned["run_id"].max()]["job_id"]
    keep = jobs["job_id"].isin(set(latest))
    if not keep.any():
        return jobs, scores
    jobs = jobs[keep].reset_index(drop=True)
    if not scores.empty:
        scores = scores[scores["job_id"].isin(set(jobs["job_id"]))].reset_index(drop=True)
    return jobs, scores


def _json_dict(text: Any) -> dict:
    if isinstance(text, dict):
        return text
    if text is None or (isinstance(text, float) and math.isnan(text)) or text == "":
        return {}
    value = json.loads(text)
    return value if isinstance(value, dict) else {"value": value}


def _without(params: dict, keys: tuple[str, ...]) -> dict:
    return {k: v for k, v in params.items() if k not in keys}


def _canonical(params: dict) -> str:
    return json.dumps(params, sort_keys=True, default=str)


def _unique_labels(labels: pd.Series, specs: pd.Series) -> pd.Series:
    """Keep each label, adding the parameters that differ when one label covers several specs."""
    keys = specs.map(_canonical)
    base = labels.astype(str)
    out = base.copy()
    for label in base.unique():
        mask = base == label
        distinct = {key: json.loads(key) for key in keys[mask].unique()}
        if len(distinct) < 2:
            continue
        names = sorted({k for d in distinct.values() for k in d})
        varying = [
            k for k in names if len({_canonical({"v": d.get(k)}) for d in distinct.values()}) > 1
        ]
        for key, d in distinct.items():
            extra = ", ".join(f"{k}={d.get(k)}" for k in varying)
            out[mask & (keys == key)] = f"{label} [{extra}]"
    return out


def load_results(out_dir: str | Path) -> Results:
    """Read ``out_dir/store.sqlite`` (read-only) into a :class:`Results`.

    Raises
    ------
    InputError
        When the folder holds no store.
    """
    out_dir = Path(out_dir)
    path = out_dir / STORE_NAME
    if not path.is_file():
        raise InputError(
            f"no results store in {str(out_dir)!r} (expected {path.name} there); "
            f"give the folder a `lowdim run` wrote to."
        )
    con = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
    try:
        jobs = _read_table(con, "jobs")
        scores = _read_table(con, "scores")
        runs = _read_table(con, "runs")
        planned = _read_table(con, "planned")
    finally:
        con.close()
    jobs, scores = _latest_suite_only(jobs, scores, planned)
    if jobs.empty:
        raise InputError(
            f"the results store {str(path)!r} holds no jobs yet; run a suite into "
            f"{str(out_dir)!r} first."
        )
    if scores.empty:
        scores = pd.DataFrame(columns=["job_id", "metric", "k", "value"])
    scores["k"] = pd.to_numeric(scores["k"]).fillna(0).astype(int)
    scores["value"] = pd.to_numeric(scores["value"], errors="coerce")
    for col in ("dataset_label", "method_label"):
        if col not in jobs:
            jobs[col] = jobs[col.removesuffix("_label")]
        jobs[col] = jobs[col].fillna(jobs[col.removesuffix("_label")]).astype(str)
    jobs["data_spec"] = (
        jobs["dataset_params"].map(_json_dict).map(lambda d: _without(d, ("seed",)))
    )
    jobs["config_spec"] = (
        jobs["method_params"].map(_json_dict).map(lambda d: _without(d, _SEED_KEYS))
    )
    jobs["data"] = _unique_labels(jobs["dataset_label"], jobs["data_spec"])
    jobs["config"] = _unique_labels(jobs["method_label"], jobs["config_spec"])
    jobs["family"] = jobs["method"].astype(str)
    for col in ("fit_seconds", "peak_mb", "n_samples", "n_features", "seed"):
        if col in jobs:
            jobs[col] = pd.to_numeric(jobs[col], errors="coerce")
    return Results(out_dir=out_dir, jobs=jobs, scores=scores, runs=runs)


def criterion_key(metric: str, k: int) -> str:
    """``"trustworthiness@10"`` for a K criterion, the bare name when k is 0."""
    return f"{metric}@{int(k)}" if int(k) else str(metric)


def parse_criterion(key: str) -> tuple[str, int]:
    """Invert :func:`criterion_key`."""
    metric, _, k = key.partition("@")
    return metric, int(k) if k else 0


def _registry_metric(name: str) -> Any:
    from lowdim.metrics import get_metric

    return get_metric(name)


def higher_is_better(metric: str) -> bool | None:
    """The registry's direction for ``metric`` (a name or criterion key); None if unknown."""
    name = parse_criterion(metric)[0]
    try:
        return bool(_registry_metric(name).higher_is_better)
    except (InputError, KeyError):
        return None


def criterion_table(results: Results) -> pd.DataFrame:
    """Scores of finished jobs in long form with display labels and the criterion key.

    Columns: ``job_id, dataset, method, family, seed, metric, k, criterion, value``.
    Failed jobs are left out: a partial timing from a failed job is not a result.
    """
    ok = results.jobs[results.jobs["status"] == "ok"]
    table = results.scores.merge(
        ok[["job_id", "data", "config", "family", "seed"]], on="job_id", how="inner"
    )
    table = table.rename(columns={"data": "dataset", "config": "method"})
    table["criterion"] = [
        criterion_key(m, k) for m, k in zip(table["metric"], table["k"], strict=True)
    ]
    cols = ["job_id", "dataset", "method", "family", "seed", "metric", "k", "criterion", "value"]
    return table[cols].reset_index(drop=True)


def summarise(table: pd.DataFrame) -> pd.DataFrame:
    """Mean and sample standard deviation (ddof = 1) over seeds per dataset, method, criterion.

    Columns: ``dataset, method, family, criterion, mean, sd, n_seeds``; sd is NaN for a
    single seed.
    """
    grouped = table.groupby(["dataset", "method", "family", "criterion"], sort=True)["value"]
    out = grouped.agg(mean="mean", sd="std", n_seeds="count").reset_index()
    return out


def rank_table(
    summary: pd.DataFrame, criterion: str, higher: bool, methods: list[str] | None = None
) -> pd.DataFrame:
    """Ranks of the methods within each dataset (1 = best, ties averaged).

    A method with no score on a dataset where others have one (it failed there, or the
    criterion was skipped) takes the worst rank, tied with the other missing ones; datasets
    where no method has the criterion are dropped.

    Returns a data frame: index datasets, columns methods.
    """
    part = summary[summary["criterion"] == criterion]
    wide = part.pivot_table(index="dataset", columns="method", values="mean", aggfunc="first")
    if methods is not None:
        wide = wide.reindex(columns=methods)
    wide = wide.dropna(how="all")
    return wide.rank(axis=1, ascending=not higher, method="average", na_option="bottom")


def mean_ranks(ranks: pd.DataFrame) -> pd.Series:
    """Mean rank of each method over the datasets, best first."""
    return ranks.mean(axis=0).sort_values()


def criteria_in(summary: pd.DataFrame) -> dict[str, bool]:
    """The ranked criteria present, with their direction; R_NX on its fine K grid is kept
    only at the K values other criteria use, and unknown metrics are dropped."""
    keys = sorted(summary["criterion"].unique())
    ks_other = {parse_criterion(c)[1] for c in keys if parse_criterion(c)[0] != "rnx"}
    out: dict[str, bool] = {}
    for key in keys:
        metric, k = parse_criterion(key)
        if metric == "rnx" and k not in ks_other:
            continue
        direction = higher_is_better(metric)
        if direction is not None:
            out[key] = direction
    return out


def headline_criteria(criteria: dict[str, bool]) -> list[str]:
    """The headline criteria among ``criteria``: each K criterion at its middle K."""
    chosen = []
    for name in _HEADLINE:
        if name in criteria:
            chosen.append(name)
            continue
        ks = sorted(parse_criterion(c)[1] for c in criteria if parse_criterion(c)[0] == name)
        if ks:
            chosen.append(criterion_key(name, ks[(len(ks) - 1) // 2]))
    if not chosen:
        chosen = [c for c in criteria if parse_criterion(c)[0] not in _COST]
    return chosen


def overall_mean_ranks(
    summary: pd.DataFrame, criteria: dict[str, bool], keys: list[str]
) -> pd.Series:
    """Mean over ``keys`` of each method's mean rank (each criterion weighs the same)."""
    methods = sorted(summary["method"].unique())
    per = [mean_ranks(rank_table(summary, c, criteria[c], methods)) for c in keys if c in criteria]
    if not per:
        return pd.Series(dtype=float)
    return pd.concat(per, axis=1).mean(axis=1).sort_values()


def tuned_summary(summary: pd.DataFrame, selection: str, higher: bool) -> pd.DataFrame:
    """Each method's best configuration per dataset, chosen by ``selection``.

    The configurations of a method (its family) compete on the mean of ``selection`` over
    seeds; the winner's rows for every criterion are kept, ``method`` becomes the family
    and ``configuration`` names the pick. Ties go to the first configuration by name.
    Reporting ``selection`` itself from this view is optimistic: it was chosen on those very
    numbers.
    """
    sel = summary[summary["criterion"] == selection].dropna(subset=["mean"])
    if sel.empty:
        return summary.iloc[0:0].assign(configuration=pd.Series(dtype=str))
    sel = sel.sort_values(
        ["dataset", "family", "mean", "method"], ascending=[True, True, not higher, True]
    )
    picks = sel.groupby(["dataset", "family"], sort=True).head(1)[["dataset", "method"]]
    tuned = summary.merge(picks, on=["dataset", "method"], how="inner")
    tuned = tuned.rename(columns={"method": "configuration"})
    tuned["method"] = tuned["family"]
    return tuned[
        ["dataset", "method", "family", "configuration", "criterion", "mean", "sd", "n_seeds"]
    ]


def criterion_statistics(
    summary: pd.DataFrame, criteria: dict[str, bool], alpha: float = 0.05
) -> dict[str, dict]:
    """Friedman, Iman-Davenport and Nemenyi per criterion, in the ``stats.json`` format.

    ``{criterion: {friedman_chi2, p_value, iman_davenport_f, iman_davenport_p,
    critical_difference, mean_ranks: {method: rank}, n_datasets, n_methods}}``; a criterion
    with fewer than 2 datasets or 2 methods has null test values (no test is possible).
    """
    methods = sorted(summary["method"].unique())
    out: dict[str, dict] = {}
    for key, higher in criteria.items():
        ranks = rank_table(summary, key, higher, methods)
        ranks = ranks.loc[:, ranks.notna().any(axis=0)]
        entry: dict[str, Any] = {
            "friedman_chi2": None,
            "p_value": None,
            "iman_davenport_f": None,
            "iman_davenport_p": None,
            "critical_difference": None,
            "mean_ranks": {m: float(r) for m, r in ranks.mean(axis=0).sort_values().items()},
            "n_datasets": int(ranks.shape[0]),
            "n_methods": int(ranks.shape[1]),
        }
        if ranks.shape[0] >= 2 and ranks.shape[1] >= 2:
            res = friedman_test(ranks.to_numpy(), alpha=alpha)
            for name in ("friedman_chi2", "p_value", "iman_davenport_f", "iman_davenport_p"):
                value = float(getattr(res, name))
                entry[name] = value if math.isfinite(value) else None
            entry["critical_difference"] = float(res.critical_difference)
        out[key] = entry
    return out


def significant_pairs(entry: dict) -> list[tuple[str, str, float]]:
    """Pairs whose mean ranks differ by more than the critical difference, largest first.

    Following Demšar (2006), the post-hoc comparison is read only when the omnibus test
    rejects at 0.05 (Iman-Davenport's F, the less conservative form, when it could be computed;
    Friedman's chi-square otherwise); otherwise this returns no pairs.
    """
    cd = entry.get("critical_difference")
    p = entry.get("iman_davenport_p")
    p = entry.get("p_value") if p is None else p
    if cd is None or p is None or p >= 0.05:
        return []
    ranks = entry["mean_ranks"]
    names = list(ranks)
    pairs = [
        (a, b, ranks[b] - ranks[a])
        for i, a in enumerate(names)
        for b in names[i + 1 :]
        if abs(ranks[b] - ranks[a]) > cd
    ]
    return sorted(pairs, key=lambda t: -abs(t[2]))


def leaderboard(summary: pd.DataFrame, criteria: dict[str, bool]) -> pd.DataFrame:
    """The leaderboard in long form: per dataset and criterion each method's mean, sd and
    rank (``scope = "dataset"``), then each method's mean rank over datasets
    (``scope = "overall"``, dataset empty, the mean rank in ``rank``).

    Columns: ``scope, dataset, method, criterion, mean, sd, n_seeds, rank``.
    """
    methods = sorted(summary["method"].unique())
    parts = []
    for key, higher in criteria.items():
        ranks = rank_table(summary, key, higher, methods)
        if ranks.empty:
            continue
        long = ranks.reset_index().melt(id_vars="dataset", var_name="method", value_name="rank")
        values = summary[summary["criterion"] == key][
            ["dataset", "method", "mean", "sd", "n_seeds"]
        ]
        long = long.merge(values, on=["dataset", "method"], how="left").assign(
            scope="dataset", criterion=key
        )
        overall = ranks.mean(axis=0).rename("rank").reset_index()
        overall = overall.assign(scope="overall", dataset="", criterion=key)
        parts.extend([long, overall])
    cols = ["scope", "dataset", "method", "criterion", "mean", "sd", "n_seeds", "rank"]
    if not parts:
        return pd.DataFrame(columns=cols)
    out = pd.concat(parts, ignore_index=True)[cols]
    out["n_seeds"] = out["n_seeds"].fillna(0).astype(int)
    return out.sort_values(["scope", "criterion", "dataset", "rank", "method"], ignore_index=True)
