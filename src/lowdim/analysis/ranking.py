"""Summaries and ranks: mean and spread per block, ranks within blocks, the order of the
configurations with its one tie-break rule, and the tuned view.

A *block* is a dataset (one row of the rank matrices): a suite's dataset, or one resample
of a file's rows in a comparison. Seeds within a block are averaged before ranking, so seeds
that change nothing do not inflate the evidence.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence

import pandas as pd

from lowdim.run.settings import OVERALL

__all__ = [
    "summarise",
    "rank_table",
    "rank_wide",
    "wide_means",
    "overall_summary",
    "tie_break_key",
    "ordered",
    "positions",
    "tuned_summary",
    "gaps_to_best",
    "natural_key",
    "over_blocks",
]

TIE_DECIMALS = 12
"""Block means equal to this many decimals are ranked as ties."""
SUMMARY_COLUMNS = ["dataset", "method", "family", "criterion", "mean", "sd", "n"]


def summarise(table: pd.DataFrame) -> pd.DataFrame:
    """Mean and sample standard deviation (ddof = 1) over seeds per block, configuration and
    criterion.

    Columns: ``dataset, method, family, criterion, mean, sd, n``; sd is NaN for one seed.
    """
    if table.empty:
        return pd.DataFrame(columns=SUMMARY_COLUMNS)
    grouped = table.groupby(["dataset", "method", "family", "criterion"], sort=True)["value"]
    out = grouped.agg(mean="mean", sd="std", n="count").reset_index()
    return out[SUMMARY_COLUMNS]


def rank_table(
    summary: pd.DataFrame, criterion: str, higher: bool, methods: Sequence[str] | None = None
) -> pd.DataFrame:
    """Ranks of the configurations within each block (1 = best, ties averaged).

    A configuration with no score in a block where others have one (it failed there, or the
    criterion was skipped) takes the worst rank, tied with the other missing ones; blocks
    where no configuration has the criterion are dropped. Means equal to 12 decimals tie:
    two methods that compute the same embedding differ only by rounding (PCA and classical
    MDS on Euclidean data, for instance).

    Returns a data frame: index blocks, columns configurations.
    """
    part = summary[summary["criterion"] == criterion]
    wide = part.pivot_table(index="dataset", columns="method", values="mean", aggfunc="first")
    return rank_wide(wide, higher, methods)


def rank_wide(
    wide: pd.DataFrame, higher: bool, methods: Sequence[str] | None = None
) -> pd.DataFrame:
    """:func:`rank_table` of block means already laid out blocks x configurations."""
    if methods is not None:
        wide = wide.reindex(columns=list(methods))
    wide = wide.dropna(how="all").round(TIE_DECIMALS)
    return wide.rank(axis=1, ascending=not higher, method="average", na_option="bottom")


def wide_means(summary: pd.DataFrame) -> dict[str, pd.DataFrame]:
    """Criterion key -> block means laid out blocks x configurations, in one pass."""
    out = {}
    for key, part in summary.groupby("criterion", sort=False):
        out[str(key)] = part.pivot(index="dataset", columns="method", values="mean")
    return out


def overall_summary(
    summary: pd.DataFrame,
    headline: Sequence[str],
    directions: Mapping[str, bool],
    methods: Sequence[str],
    families: Mapping[str, str],
) -> pd.DataFrame:
    """The :data:`~lowdim.run.settings.OVERALL` criterion: in each block, the mean of each
    configuration's ranks on the headline criteria scored there (lower is better).

    Criteria are combined within a block, never pooled as blocks of their own. Returned in
    the shape of :func:`summarise` (``sd`` NaN, ``n`` the number of criteria averaged).
    """
    tables = [
        rank_table(summary, key, directions[key], methods) for key in headline if key in directions
    ]
    tables = [t for t in tables if not t.empty]
    if not tables:
        return pd.DataFrame(columns=SUMMARY_COLUMNS)
    stacked = pd.concat(tables, keys=range(len(tables)))
    means = stacked.groupby(level=1).mean()
    counts = stacked.groupby(level=1).count()
    long = means.stack().rename("mean").reset_index()
    long.columns = ["dataset", "method", "mean"]
    long["n"] = [
        int(counts.at[d, m]) for d, m in zip(long["dataset"], long["method"], strict=True)
    ]
    long["family"] = long["method"].map(lambda m: families.get(m, m))
    long["criterion"] = OVERALL
    long["sd"] = math.nan
    return long[SUMMARY_COLUMNS]


def tie_break_key(method: str, family: str, simpler_first: Sequence[str]) -> tuple:
    """Sort key of the one tie-break rule: the simpler family first, then the label."""
    order = list(simpler_first)
    return (order.index(family) if family in order else len(order), family, method)


def ordered(
    mean_ranks: pd.Series, families: Mapping[str, str], simpler_first: Sequence[str]
) -> list[str]:
    """Configurations by mean rank (lower first), equal mean ranks by :func:`tie_break_key`."""
    return sorted(
        mean_ranks.index,
        key=lambda m: (
            round(float(mean_ranks[m]), 9),
            *tie_break_key(m, families.get(m, m), simpler_first),
        ),
    )


def positions(values: Sequence[float]) -> list[str]:
    """Places for values already in order: ``"1"``, or ``"=2"`` for each of a tied group."""
    rounded = [round(float(v), 9) for v in values]
    out = []
    for v in rounded:
        first = rounded.index(v)
        tied = rounded.count(v) > 1
        out.append(f"={first + 1}" if tied else str(first + 1))
    return out


def tuned_summary(
    summary: pd.DataFrame, selection: str, higher: bool, simpler_first: Sequence[str]
) -> pd.DataFrame:
    """Each family's best configuration per block, chosen by ``selection``.

    The configurations of a family compete on the block mean of ``selection``; equal values go
    by :func:`tie_break_key`. The winner's rows for every criterion are kept, ``method``
    becomes the family and ``configuration`` names the pick. Reporting ``selection`` itself
    from this view is optimistic: it was chosen on those very numbers.
    """
    cols = ["dataset", "method", "family", "configuration", "criterion", "mean", "sd", "n"]
    sel = summary[summary["criterion"] == selection].dropna(subset=["mean"])
    if sel.empty:
        return pd.DataFrame(columns=cols)
    sel = sel.assign(
        _value=sel["mean"] * (-1 if higher else 1),
        _tie=[
            tie_break_key(m, f, simpler_first)
            for m, f in zip(sel["method"], sel["family"], strict=True)
        ],
    )
    sel = sel.sort_values(["dataset", "family", "_value", "_tie"])
    picks = sel.groupby(["dataset", "family"], sort=True).head(1)[["dataset", "method"]]
    tuned = summary.merge(picks, on=["dataset", "method"], how="inner")
    tuned = tuned.rename(columns={"method": "configuration"})
    tuned["method"] = tuned["family"]
    return tuned[cols]


def gaps_to_best(summary: pd.DataFrame, directions: Mapping[str, bool]) -> pd.DataFrame:
    """Each configuration's distance from the best block mean, per block and criterion.

    ``gap`` is >= 0 and in the criterion's own units (0 for the best); ``best`` names the
    best configuration. Columns: ``dataset, method, criterion, mean, best, best_method, gap``.
    """
    rows = []
    for (dataset, key), part in summary.groupby(["dataset", "criterion"], sort=True):
        if key not in directions:
            continue
        values = part.set_index("method")["mean"].dropna()
        if values.empty:
            continue
        higher = directions[key]
        best_method = values.idxmax() if higher else values.idxmin()
        best = float(values[best_method])
        for method, value in values.items():
            gap = (best - value) if higher else (value - best)
            rows.append((dataset, method, key, float(value), best, best_method, float(gap)))
    cols = ["dataset", "method", "criterion", "mean", "best", "best_method", "gap"]
    return pd.DataFrame(rows, columns=cols)


def natural_key(text: str) -> list:
    """Sort key putting ``n=40`` before ``n=160``: digit runs compare as numbers."""
    return [
        (0, float(t), "") if t[:1].isdigit() else (1, 0.0, t)
        for t in re.findall(r"\d+(?:\.\d+)?|\D+", str(text))
    ]


def over_blocks(summary: pd.DataFrame) -> pd.DataFrame:
    """Each configuration's value of each criterion over the blocks.

    ``mean`` is the mean of the block means; ``spread`` is their sample standard deviation
    when there are two blocks or more (the data's own variation: datasets, or resamples of
    one file), else the seed spread within the one block. Columns: ``method, criterion, mean,
    spread, n_blocks``.
    """
    if summary.empty:
        return pd.DataFrame(columns=["method", "criterion", "mean", "spread", "n_blocks"])
    grouped = summary.dropna(subset=["mean"]).groupby(["method", "criterion"], sort=True)
    out = grouped.agg(
        mean=("mean", "mean"),
        spread=("mean", "std"),
        n_blocks=("mean", "count"),
        sd=("sd", "first"),
    ).reset_index()
    single = out["n_blocks"] < 2
    out.loc[single, "spread"] = out.loc[single, "sd"]
    return out.drop(columns=["sd"])
