"""Tables as plain data: rows of already-formatted cells, read off the :class:`Analysis`.

The Markdown, LaTeX, HTML and terminal outputs render these same rows, so each shows the same
numbers in the same order. A cell is a dict ``{"text": str, "best": bool}``; ``best`` marks
the best value of its column (bold in every format).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from lowdim.analysis.engine import Analysis
from lowdim.analysis.ranking import natural_key, over_blocks
from lowdim.report import format as fmt
from lowdim.run.settings import OVERALL, parse_criterion

__all__ = ["Table", "criterion_title", "overall_table", "dataset_tables", "tuned_tables"]


@dataclass
class Table:
    """A table ready to render: a title, column headers, rows of cells, and a note."""

    title: str
    header: list[str]
    rows: list[list[dict]] = field(default_factory=list)
    note: str = ""


def _cell(text: str, best: bool = False) -> dict:
    return {"text": text, "best": bool(best)}


def criterion_title(key: str) -> str:
    """``trustworthiness (K = 10)``; the overall criterion says what it is."""
    if key == OVERALL:
        return "overall rank"
    metric, k = parse_criterion(key)
    return f"{metric} (K = {k})" if k else metric


def _arrow(an: Analysis, key: str) -> str:
    return "" if an.directions.get(key, True) else " ↓"


def _selection_header(an: Analysis) -> str:
    if an.selection == OVERALL:
        return "overall (mean rank)"
    return f"{criterion_title(an.selection)} (mean rank)"


def overall_table(an: Analysis, *, values: bool = False, compact: bool = False) -> Table:
    """Every configuration in the verdict's order: its place, its mean rank on the selection,
    and per headline criterion its mean rank over the blocks (``values=False``) or its mean
    and spread over the blocks (``values=True``, the comparison's table). ``compact`` heads
    the columns with criterion keys (``trustworthiness@10``), for a terminal."""
    keys = an.headline
    header = ["place", "configuration", _selection_header(an)]
    header += [(k if compact else criterion_title(k)) + _arrow(an, k) for k in keys]
    if values:
        header.append("first in")
        firsts = (an.first_share() * len(an.blocks)).round().astype(int)
    table = Table(title="Leaderboard", header=header)
    mean_ranks = {k: an.ranks[k].mean(axis=0) for k in keys}
    blocks = over_blocks(an.summary).set_index(["method", "criterion"])
    best_sel = an.selection_ranks.min() if len(an.selection_ranks) else math.nan
    for m in an.order:
        sel = an.selection_ranks.get(m, math.nan)
        row = [
            _cell(an.position[m]),
            _cell(m),
            _cell(
                fmt.rank(sel) if math.isfinite(sel) else "failed",
                sel == best_sel and math.isfinite(sel),
            ),
        ]
        for k in keys:
            if values:
                hit = blocks.loc[(m, k)] if (m, k) in blocks.index else None
                if hit is None:
                    row.append(_cell("–"))
                    continue
                col = blocks.xs(k, level="criterion")["mean"]
                best = col.max() if an.directions[k] else col.min()
                row.append(_cell(fmt.mean_sd(hit["mean"], hit["spread"]), hit["mean"] == best))
            else:
                r = mean_ranks[k].get(m, math.nan)
                row.append(_cell(fmt.rank(r), r == mean_ranks[k].min()))
        if values:
            row.append(_cell(f"{firsts.get(m, 0)} of {len(an.blocks)}"))
        table.rows.append(row)
    n = len(an.blocks)
    what = "resamples of the file" if an.settings.blocks == "resamples" else "datasets"
    if values:
        table.note = (
            f"Mean ± spread over {n} {what} (the spread is the standard deviation across "
            "them; with one, across seeds). Best value of each column in bold; ↓ lower is "
            f"better; 'first in' counts the {what} where the setting ranks first on the "
            "selection (ties included)."
        )
    else:
        table.note = (
            f"Mean rank over the {n} {what} (1 = best, ties averaged; a configuration that "
            "failed somewhere takes the last rank there). Places tied on the selection are "
            f"shown as =1; {an.settings.tie_break}."
        )
    return table


def _dataset_order(an: Analysis, dataset: str) -> list[str]:
    """Configurations by their rank on the selection within one block, ties as the verdict."""
    ranks = an.ranks.get(an.selection)
    if ranks is None or dataset not in ranks.index:
        return list(an.order)
    row = ranks.loc[dataset]
    index = {m: i for i, m in enumerate(an.order)}
    return sorted(an.order, key=lambda m: (row.get(m, math.inf), index[m]))


def dataset_tables(an: Analysis) -> list[Table]:
    """One table per block: configurations by rank there, headline means ± seed spread with
    the rank after ``#``."""
    keys = an.headline
    cells = {
        (d, m, c): (mean, sd)
        for d, m, c, mean, sd in zip(
            an.summary["dataset"],
            an.summary["method"],
            an.summary["criterion"],
            an.summary["mean"],
            an.summary["sd"],
            strict=True,
        )
    }
    out = []
    for dataset in an.blocks:
        header = ["configuration"] + [criterion_title(k) + _arrow(an, k) for k in keys]
        table = Table(title=str(dataset), header=header)
        ranks = {k: an.ranks[k].loc[dataset] for k in keys if dataset in an.ranks[k].index}
        for m in _dataset_order(an, dataset):
            row = [_cell(m)]
            for k in keys:
                mean, sd = cells.get((dataset, m, k), (math.nan, math.nan))
                if k not in ranks or not math.isfinite(mean):
                    row.append(_cell("no score"))
                    continue
                r = ranks[k][m]
                text = f"{fmt.mean_sd(mean, sd)} (#{r:g})"
                row.append(_cell(text, r == ranks[k].min()))
            table.rows.append(row)
        table.note = (
            f"Mean ± standard deviation over seeds; the rank on {dataset} after #. Sorted by "
            f"the rank on {criterion_title(an.selection)} there."
        )
        out.append(table)
    return out


def tuned_tables(an: Analysis) -> list[Table]:
    """Per block, each method family at its best configuration by the selection."""
    tuned = an.tuned
    if tuned.empty or an.summary["method"].nunique() <= an.summary["family"].nunique():
        return []
    keys = [k for k in an.headline if k in set(tuned["criterion"])]
    out = []
    for dataset in sorted(tuned["dataset"].unique(), key=natural_key):
        part = tuned[tuned["dataset"] == dataset]
        picks = part.drop_duplicates("method").set_index("method")["configuration"]
        header = ["method", "configuration"] + [criterion_title(k) for k in keys]
        table = Table(title=str(dataset), header=header)
        best = {}
        for k in keys:
            col = part[part["criterion"] == k].set_index("method")["mean"].dropna()
            best[k] = (col.max() if an.directions[k] else col.min()) if len(col) else math.nan
        for family in picks.index:
            row = [_cell(family), _cell(picks[family])]
            for k in keys:
                hit = part[(part["method"] == family) & (part["criterion"] == k)]
                if hit.empty:
                    row.append(_cell("–"))
                    continue
                mean = hit["mean"].iloc[0]
                row.append(_cell(fmt.mean_sd(mean, hit["sd"].iloc[0]), mean == best[k]))
            table.rows.append(row)
        out.append(table)
    return out
