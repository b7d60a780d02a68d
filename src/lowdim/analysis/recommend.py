"""A ranked table and a reasoned recommendation from the scores of one comparison.

Pure functions over a long-form scores table (the columns of ``scores.csv``: ``dataset``,
``method``, ``seed``, ``metric``, ``k``, ``value``), so the wording can be checked on
hand-made numbers without running anything. ``method`` holds display labels of the form
``family(key=value, ...)``; the family is the registered method name.

A *repeat* is one (dataset, seed) pair: its spread is what the seeds move. A *block* of the
rank statistics is one (dataset, criterion) pair, the value averaged over seeds, so seeds that
change nothing (deterministic solvers) do not inflate the evidence. The significance test is
Friedman's with the Nemenyi critical difference (Demšar 2006), among the best setting of each
method family.

References
----------
.. [1] J. Demšar, "Statistical comparisons of classifiers over multiple data sets",
   Journal of Machine Learning Research 7, 1-30, 2006.
.. [2] J. Venna and S. Kaski, "Local multidimensional scaling", Neural Networks 19(6-7),
   889-899, 2006. https://doi.org/10.1016/j.neunet.2006.05.014
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

__all__ = [
    "Criterion",
    "DataFacts",
    "headline_criteria",
    "parse_label",
    "summarise",
    "rank_matrix",
    "format_table",
    "recommend",
]

# Two settings whose scores differ by less than this are called equal (criteria in [0, 1]).
TOLERANCE = 0.01
# A bandwidth sweep whose headline score spans more than this is called sensitive.
SENSITIVITY = 0.1
# Families with nothing to tune, simplest first: they win ties.
SIMPLER = ("pca", "classical_mds")


@dataclass(frozen=True)
class Criterion:
    """One headline criterion: a registered metric at one K (0 when it takes none).

    ``scope`` is ``"local"`` (neighbourhoods), ``"global"`` (distances between far points)
    or ``"labels"`` (agreement with the user's classes).
    """

    metric: str
    k: int
    higher_is_better: bool
    scope: str

    @property
    def label(self) -> str:
        return f"{self.metric}@{self.k}" if self.k else self.metric


def headline_criteria(k: int = 10, *, labels: bool = True) -> list[Criterion]:
    """The criteria a comparison ranks on, neighbourhood ones at ``k``."""
    crits = [
        Criterion("trustworthiness", k, True, "local"),
        Criterion("continuity", k, True, "local"),
        Criterion("rnx_auc", 0, True, "local"),
        Criterion("distance_spearman", 0, True, "global"),
        Criterion("stress", 0, False, "global"),
    ]
    if labels:
        crits += [
            Criterion("knn_accuracy", k, True, "labels"),
            Criterion("silhouette", 0, True, "labels"),
        ]
    return crits


@dataclass
class DataFacts:
    """What the comparison found about the data itself, for the cautions.

    Attributes
    ----------
    n_samples : int
        Rows in the file.
    n_duplicates : int
        Rows equal to an earlier row.
    components : dict
        Number of connected components of the kNN graph, by n_neighbors.
    subsample : int or None
        Size of each subsample when the file was too large to use whole.
    failures : list of (method label, status, message)
        Jobs that did not finish.
    missing : dict
        Criteria that could not be computed, mapped to the reason.
    """

    n_samples: int = 0
    n_duplicates: int = 0
    components: dict[int, int] = field(default_factory=dict)
    subsample: int | None = None
    failures: list[tuple[str, str, str]] = field(default_factory=list)
    missing: dict[str, str] = field(default_factory=dict)


def parse_label(label: str) -> tuple[str, dict[str, str]]:
    """Split ``"kernel_pca(bandwidth=median, kernel=rbf)"`` into family and settings."""
    match = re.fullmatch(r"\s*([^()]+?)\s*(?:\((.*)\))?\s*", label)
    if match is None:
        return label, {}
    settings = {}
    for part in filter(None, (p.strip() for p in (match.group(2) or "").split(","))):
        key, _, value = part.partition("=")
        settings[key.strip()] = value.strip()
    return match.group(1), settings


def _values(scores: pd.DataFrame, criteria: Sequence[Criterion]) -> pd.DataFrame:
    """One row per (dataset, seed, method), one column per criterion present."""
    parts = []
    for crit in criteria:
        rows = scores[(scores["metric"] == crit.metric) & (scores["k"] == crit.k)]
        if len(rows):
            parts.append(
                rows.groupby(["dataset", "seed", "method"])["value"].mean().rename(crit.label)
            )
    if not parts:
        return pd.DataFrame()
    return pd.concat(parts, axis=1)


def _present(values: pd.DataFrame, criteria: Sequence[Criterion]) -> list[Criterion]:
    return [c for c in criteria if c.label in values.columns]


def rank_matrix(scores: pd.DataFrame, criteria: Sequence[Criterion]) -> pd.DataFrame:
    """Ranks of the methods (columns) in each (dataset, criterion) block (rows).

    Values are averaged over seeds first; 1 is best, ties are averaged, and a method with no
    score in a block (its job failed) takes the worst rank there.
    """
    values = _values(scores, criteria)
    crits = _present(values, criteria)
    if not crits:
        return pd.DataFrame()
    means = values.groupby(level=["dataset", "method"]).mean()
    blocks = {}
    for dataset in means.index.get_level_values("dataset").unique():
        table = means.xs(dataset, level="dataset")
        for crit in crits:
            blocks[(dataset, crit.label)] = table[crit.label].rank(
                ascending=not crit.higher_is_better, method="average", na_option="bottom"
            )
    return pd.DataFrame(blocks).T.rename_axis(["dataset", "criterion"])


def summarise(scores: pd.DataFrame, criteria: Sequence[Criterion]) -> pd.DataFrame:
    """Mean and spread over repeats of each criterion per method, sorted by mean rank.

    Columns: ``family``, ``mean_rank``, ``repeats``, and ``<criterion>`` / ``<criterion> sd``
    for each criterion present. The spread is the sample standard deviation over the
    (dataset, seed) repeats, 0 when there is one.
    """
    values = _values(scores, criteria)
    crits = _present(values, criteria)
    by_method = values.groupby(level="method")
    out = pd.DataFrame(index=by_method.size().index)
    out["family"] = [parse_label(m)[0] for m in out.index]
    out["mean_rank"] = rank_matrix(scores, crits).mean(axis=0)
    out["repeats"] = by_method.size()
    for crit in crits:
        out[crit.label] = by_method[crit.label].mean()
        out[f"{crit.label} sd"] = by_method[crit.label].std(ddof=1).fillna(0.0)
    # On equal mean ranks the simpler method goes first: PCA, then classical MDS.
    out["_simpler"] = [SIMPLER.index(f) if f in SIMPLER else len(SIMPLER) for f in out["family"]]
    out["_rank"] = out["mean_rank"].round(9)
    out = out.sort_values(["_rank", "_simpler"], kind="stable")
    return out.drop(columns=["_rank", "_simpler"])


def format_table(summary: pd.DataFrame, criteria: Sequence[Criterion]) -> str:
    """The ranked table as fixed-width text: settings, mean rank, mean ± sd per criterion."""
    crits = [c for c in criteria if c.label in summary.columns]
    header = ["#", "method and settings", "mean rank"] + [
        c.label + ("" if c.higher_is_better else " (lower better)") for c in crits
    ]
    rows = []
    for i, (label, row) in enumerate(summary.iterrows(), start=1):
        cells = [str(i), str(label), f"{row['mean_rank']:.2f}"]
        for c in crits:
            mean, sd = row[c.label], row[f"{c.label} sd"]
            cells.append("failed" if pd.isna(mean) else f"{mean:.3f} ± {sd:.3f}")
        rows.append(cells)
    widths = [max(len(r[j]) for r in [header, *rows]) for j in range(len(header))]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    for cells in rows:
        lines.append(
            "  ".join(
                c.ljust(w) if j == 1 else c.rjust(w)
                for j, (c, w) in enumerate(zip(cells, widths, strict=True))
            ).rstrip()
        )
    return "\n".join(lines)


def _better(crit: Criterion, a: float, b: float) -> float:
    """How much ``a`` beats ``b`` on ``crit`` (positive when ``a`` is better)."""
    return (a - b) if crit.higher_is_better else (b - a)


def _family_best(summary: pd.DataFrame) -> pd.Series:
    """The best-ranked configuration label of each family, best family first."""
    return summary.groupby("family", sort=False).apply(lambda t: t.index[0])


def _significance(scores: pd.DataFrame, crits: Sequence[Criterion], leaders: Sequence[str]):
    from lowdim.analysis.stats import friedman_test

    ranks = rank_matrix(scores, crits)[list(leaders)]
    reranked = ranks.rank(axis=1, method="average")
    return friedman_test(reranked.to_numpy(float)), reranked.mean(axis=0)


def _lead_sentences(
    summary: pd.DataFrame, scores: pd.DataFrame, crits: Sequence[Criterion]
) -> list[str]:
    best = summary.index[0]
    leaders = _family_best(summary)
    lines = [
        f"Use {best}: it has the best mean rank ({summary.loc[best, 'mean_rank']:.2f} among "
        f"{len(summary)} settings) over {', '.join(c.label for c in crits)}."
    ]
    if len(leaders) < 2:
        return lines
    rival = leaders.iloc[1]
    lines.append(_versus_sentence(summary, crits, best, rival))
    result, family_ranks = _significance(scores, crits, list(leaders))
    rank_gap = family_ranks[rival] - family_ranks[leaders.iloc[0]]
    cd = result.critical_difference
    position = (
        f"it has the same mean rank as {rival}"
        if abs(rank_gap) < 0.005
        else f"it is {rank_gap:.2f} mean ranks ahead of {rival}"
    )
    among = (
        f"Among the best setting of each of {len(leaders)} methods over "
        f"{result.n_datasets} (dataset, criterion) blocks, {position}"
    )
    if result.p_value >= 0.05:
        lines.append(
            f"{among}, but the Friedman test finds no difference among the methods "
            f"(p = {result.p_value:.2g}; the Nemenyi critical difference would be {cd:.2f}), "
            "so the lead is not significant."
        )
    elif abs(rank_gap) < 0.005:
        lines.append(f"{among} (the Nemenyi critical difference is {cd:.2f}): either will do.")
    elif rank_gap > cd:
        lines.append(
            f"{among}, more than the Nemenyi critical difference of {cd:.2f} (alpha 0.05): "
            "the lead is significant."
        )
    else:
        lines.append(
            f"{among}, within the Nemenyi critical difference of {cd:.2f} (alpha 0.05): the "
            "lead is not significant, so either will do."
        )
    return lines


def _gaps(
    summary: pd.DataFrame, crits: Sequence[Criterion], a: str, b: str
) -> dict[str, list[tuple[str, float]]]:
    """Criteria on which ``a`` is ahead of, level with or behind ``b``.

    Level means the difference is within the seed spread (the two standard deviations added)
    or within TOLERANCE, whichever is larger.
    """
    out: dict[str, list[tuple[str, float]]] = {"ahead": [], "level": [], "behind": []}
    for c in crits:
        gap = _better(c, summary.loc[a, c.label], summary.loc[b, c.label])
        if pd.isna(gap):
            continue
        spread = summary.loc[a, f"{c.label} sd"] + summary.loc[b, f"{c.label} sd"]
        margin = max(TOLERANCE, spread)
        side = "ahead" if gap > margin else "behind" if gap < -margin else "level"
        out[side].append((c.label, gap))
    return out


def _listing(items: list[tuple[str, float]]) -> str:
    parts = [f"{name} by {abs(gap):.3f}" for name, gap in items]
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]


def _versus_sentence(summary: pd.DataFrame, crits: Sequence[Criterion], best: str, rival: str):
    gaps = _gaps(summary, crits, best, rival)
    clauses = []
    if gaps["ahead"]:
        clauses.append(f"leads on {_listing(gaps['ahead'])}, beyond the seed spread")
    if gaps["level"]:
        names = ", ".join(n for n, _ in gaps["level"])
        clauses.append(f"is level on {names} (within the seed spread or {TOLERANCE})")
    if gaps["behind"]:
        clauses.append(f"trails on {_listing(gaps['behind'])}")
    return f"Against the best other method, {rival}, it " + "; ".join(clauses) + "."


def _pca_sentence(summary: pd.DataFrame, crits: Sequence[Criterion]) -> str | None:
    pca = [m for m in summary.index if summary.loc[m, "family"] == "pca"]
    if not pca:
        return None
    pca, best = pca[0], summary.index[0]
    if summary.loc[best, "family"] == "pca":
        return "PCA itself ranks first: nothing more complex is needed."
    gaps = _gaps(summary, crits, pca, best)
    behind = [(name, -gap) for name, gap in gaps["behind"]]
    if not behind:
        return (
            f"PCA is as good as {best} on every criterion (within {TOLERANCE} or the seed "
            "spread): a simpler method will do, so prefer PCA, which has no bandwidth or "
            "neighbour count to choose."
        )
    worst = max(behind, key=lambda t: t[1])
    if not gaps["ahead"] and not gaps["level"]:
        return (
            f"PCA trails on every criterion (most on {worst[0]}, by {worst[1]:.3f}): a linear "
            "projection misses this structure, so a simpler method will not do."
        )
    parts = []
    if gaps["ahead"]:
        parts.append(f"better than {best} on {_listing(gaps['ahead'])}")
    if gaps["level"]:
        names = ", ".join(n for n, _ in gaps["level"])
        parts.append(f"as good on {names}" if parts else f"as good as {best} on {names}")
    return (
        f"PCA is {' and '.join(parts)} (a simpler method will do if that is what you need), "
        f"but trails on {_listing(behind)}."
    )


def _disagreement_sentence(summary: pd.DataFrame, crits: Sequence[Criterion]) -> str | None:
    winners: dict[str, list[tuple[Criterion, str]]] = {"local": [], "global": []}
    for c in crits:
        if c.scope in winners:
            col = summary[c.label]
            winners[c.scope].append((c, col.idxmax() if c.higher_is_better else col.idxmin()))
    if not winners["local"] or not winners["global"]:
        return None
    local = {w for _, w in winners["local"]}
    glob = {w for _, w in winners["global"]}
    if local & glob:
        return None
    (lc, lw), (gc, gw) = winners["local"][0], winners["global"][0]
    local_order = summary[lc.label].rank(ascending=not lc.higher_is_better)
    global_order = summary[gc.label].rank(ascending=not gc.higher_is_better)
    rho = local_order.corr(global_order, method="pearson")
    return (
        f"The criteria disagree: {lw} keeps local neighbourhoods best ({lc.label} "
        f"{summary.loc[lw, lc.label]:.3f}) while {gw} keeps global distances best "
        f"({gc.label} {summary.loc[gw, gc.label]:.3f}); the two orders of the settings "
        f"correlate at {rho:.2f}. Prefer the first to read clusters and neighbours, the "
        "second to read distances between far-apart points."
    )


def _sensitivity_sentences(summary: pd.DataFrame, crits: Sequence[Criterion]) -> list[str]:
    """One line per family whose bandwidth sweep moves some criterion by more than
    SENSITIVITY, naming the criterion that moves most and what the rules picked."""
    lines = []
    for family, table in summary.groupby("family", sort=False):
        swept = [m for m in table.index if "bandwidth" in parse_label(m)[1]]
        if len(swept) < 2:
            continue
        widest = None
        for crit in crits:
            col = table.loc[swept, crit.label].dropna()
            if len(col) >= 2 and (widest is None or np.ptp(col) > np.ptp(widest[1])):
                widest = (crit, col)
        if widest is None or np.ptp(widest[1]) <= SENSITIVITY:
            continue
        crit, col = widest
        best = col.idxmax() if crit.higher_is_better else col.idxmin()
        worst = col.idxmin() if crit.higher_is_better else col.idxmax()
        rules = [
            f"{parse_label(m)[1]['bandwidth']} {col[m]:.3f}"
            for m in col.index
            if not _is_number(parse_label(m)[1]["bandwidth"])
        ]
        picks = f"; the rules give {', '.join(rules)}" if rules else ""
        lines.append(
            f"{family} is sensitive to the bandwidth: {crit.label} ranges from "
            f"{col[worst]:.3f} (bandwidth={parse_label(worst)[1]['bandwidth']}) to "
            f"{col[best]:.3f} (bandwidth={parse_label(best)[1]['bandwidth']}) over the "
            f"{len(col)} bandwidths tried{picks}; check the pick before trusting a plot."
        )
    return lines


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _caution_sentences(
    summary: pd.DataFrame, crits: Sequence[Criterion], facts: DataFacts
) -> list[str]:
    lines = []
    if facts.n_duplicates:
        lines.append(
            f"{facts.n_duplicates} of {facts.n_samples} rows repeat an earlier row; neighbour "
            "graphs and rank criteria treat them as distance-0 neighbours, so consider "
            "removing them."
        )
    split = {k: c for k, c in sorted(facts.components.items()) if c > 1}
    if split:
        parts = ", ".join(f"{c} pieces at n_neighbors={k}" for k, c in split.items())
        lines.append(
            f"The neighbour graph is disconnected ({parts}); graph methods then place the "
            "pieces arbitrarily relative to each other, so trust them only within a piece or "
            "use more neighbours."
        )
    if crits:
        lines += _sensitivity_sentences(summary, crits)
    if facts.failures:
        shown = "; ".join(f"{m} ({s}: {msg})" for m, s, msg in facts.failures[:3])
        more = f" and {len(facts.failures) - 3} more" if len(facts.failures) > 3 else ""
        count = len(facts.failures)
        lines.append(f"{count} run{'s' if count != 1 else ''} did not finish: {shown}{more}.")
    spreads = summary[[c for c in summary.columns if c.endswith(" sd")]]
    if len(summary) and spreads.size and bool((spreads.fillna(0.0) == 0.0).all().all()):
        lines.append(
            "No seed changed any score (the methods are deterministic on these rows), so the "
            "spread is 0 and only the critical difference speaks to chance."
        )
    if facts.subsample:
        lines.append(
            f"The file has {facts.n_samples} rows; each run used a random subsample of "
            f"{facts.subsample}, and the spread includes the change of subsample."
        )
    return lines


def recommend(
    scores: pd.DataFrame,
    criteria: Sequence[Criterion],
    facts: DataFacts | None = None,
) -> list[str]:
    """The recommendation, one plain sentence per line, computed from the scores.

    Parameters
    ----------
    scores : DataFrame
        Long form with columns ``dataset``, ``method``, ``seed``, ``metric``, ``k``, ``value``.
    criteria : sequence of Criterion
        The headline criteria; the first one is the one leads are measured on. Criteria with
        no scores are skipped (and should be listed in ``facts.missing``).
    facts : DataFacts, optional
        What is known about the data, for the cautions.

    Returns
    -------
    list of str
    """
    facts = facts or DataFacts()
    values = _values(scores, criteria)
    crits = _present(values, criteria)
    if not crits:
        lines = ["No run finished with scores, so there is nothing to recommend."]
        return lines + _caution_sentences(pd.DataFrame(columns=["family"]), [], facts)
    summary = summarise(scores, crits)
    lines = _lead_sentences(summary, scores, crits)
    for sentence in (_pca_sentence(summary, crits), _disagreement_sentence(summary, crits)):
        if sentence:
            lines.append(sentence)
    lines += _caution_sentences(summary, crits, facts)
    if facts.missing:
        lines.append(_missing_sentence(facts.missing))
    return lines


def _missing_sentence(missing: Mapping[str, str]) -> str:
    by_reason: dict[str, list[str]] = {}
    for name, reason in missing.items():
        by_reason.setdefault(reason, []).append(name)
    parts = [f"{', '.join(names)} ({reason})" for reason, names in by_reason.items()]
    return "Not computed: " + "; ".join(parts) + "."
