"""The machine-readable and printable files of a results folder, rendered from the Analysis.

- ``leaderboard.csv``: long form at full precision, the verdict's order first;
- ``leaderboard.md`` and ``leaderboard.tex``: the tables of :mod:`lowdim.report.views`;
- ``stats.json``: the verdict, the blocks and every test;
- ``scores.csv`` and ``scores.parquet``: every stored score of the latest run's jobs in long
  form with display labels, the same rows in both (the Parquet twin when pyarrow is there).
"""

from __future__ import annotations

import io
import json
import math
from typing import Any

import pandas as pd

from lowdim.analysis.engine import Analysis, CriterionTests
from lowdim.analysis.ranking import over_blocks
from lowdim.report import format as fmt
from lowdim.report.narrative import blocks_phrase, strength, test_form, verdict
from lowdim.report.views import (
    Table,
    criterion_title,
    dataset_tables,
    overall_table,
    tuned_tables,
)

__all__ = [
    "SCORE_COLUMNS",
    "leaderboard_csv",
    "leaderboard_markdown",
    "leaderboard_latex",
    "stats_json",
    "scores_frame",
    "scores_csv",
    "scores_parquet",
]

SCORE_COLUMNS = ("job_id", "dataset", "method", "seed", "metric", "k", "value")
_LEADERBOARD_COLUMNS = (
    "scope, place, tied, configuration, method, dataset, criterion, mean, sd, n, rank".split(", ")
)


def _full(value: Any) -> str:
    """A float at full precision (``repr`` round-trips float64); empty for a missing value."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    return repr(float(value))


def leaderboard_csv(an: Analysis) -> str:
    """Long form: the overall rows (each configuration's mean rank over the blocks and the mean
    of its block means per criterion) in the verdict's order, then the per-block rows.

    Columns: ``scope, place, tied, configuration, method, dataset, criterion, mean, sd, n,
    rank``; ``place`` is the verdict's place (a number; ``tied`` says whether it is shared);
    the first row names the winner on the selection.
    """
    rows = []
    criteria = [an.selection] + [k for k in an.criteria if k != an.selection]
    values = over_blocks(an.summary).set_index(["method", "criterion"])
    ranks = {k: an.ranks[k].mean(axis=0) for k in criteria}
    for m in an.order:
        for k in criteria:
            v = values.loc[(m, k)] if (m, k) in values.index else None
            rows.append(
                {
                    "scope": "overall",
                    "place": an.position[m].lstrip("="),
                    "tied": an.position[m].startswith("="),
                    "configuration": m,
                    "method": an.family(m),
                    "dataset": "",
                    "criterion": k,
                    "mean": _full(None if v is None else v["mean"]),
                    "sd": _full(None if v is None else v["spread"]),
                    "n": "" if v is None else int(v["n_blocks"]),
                    "rank": _full(ranks[k].get(m, math.nan)),
                }
            )
    for table in _block_rows(an, criteria):
        rows.extend(table)
    frame = pd.DataFrame(rows, columns=_LEADERBOARD_COLUMNS)
    for col in ("configuration", "method", "dataset"):
        frame[col] = frame[col].map(fmt.csv_text)
    return frame.to_csv(index=False, lineterminator="\n")


def _block_rows(an: Analysis, criteria: list[str]) -> list[list[dict]]:
    out = []
    cells = an.summary.set_index(["dataset", "criterion", "method"]).sort_index()
    for dataset in an.blocks:
        rows = []
        for k in criteria:
            if dataset not in an.ranks[k].index:
                continue
            r = an.ranks[k].loc[dataset]
            for m in sorted(an.order, key=lambda m: (r.get(m, math.inf), an.order.index(m))):
                hit = cells.loc[(dataset, k, m)] if (dataset, k, m) in cells.index else None
                rows.append(
                    {
                        "scope": "dataset",
                        "place": "",
                        "tied": "",
                        "configuration": m,
                        "method": an.family(m),
                        "dataset": dataset,
                        "criterion": k,
                        "mean": _full(None if hit is None else hit["mean"]),
                        "sd": _full(None if hit is None else hit["sd"]),
                        "n": "" if hit is None else int(hit["n"]),
                        "rank": _full(r.get(m, math.nan)),
                    }
                )
        out.append(rows)
    return out


def _md_table(table: Table) -> list[str]:
    def cell(c: dict) -> str:
        text = fmt.md_text(c["text"])
        return f"**{text}**" if c["best"] else text

    lines = ["| " + " | ".join(fmt.md_text(h) for h in table.header) + " |"]
    aligns = ["---:" if h == "place" else "---" for h in table.header[:2]]
    lines.append("| " + " | ".join(aligns + ["---:"] * (len(table.header) - 2)) + " |")
    lines += ["| " + " | ".join(cell(c) for c in row) + " |" for row in table.rows]
    return lines


def leaderboard_markdown(an: Analysis) -> str:
    """The verdict, the leaderboard, one table per dataset, then the tuned view."""
    lines = ["# Leaderboard", "", fmt.md_text(verdict(an)), "", fmt.md_text(strength(an)), ""]
    board = overall_table(an)
    lines += _md_table(board) + ["", fmt.md_text(board.note), ""]
    for table in dataset_tables(an):
        lines += [f"## {fmt.md_text(table.title)}", ""] + _md_table(table)
        lines += ["", fmt.md_text(table.note), ""]
    tuned = tuned_tables(an)
    if tuned:
        title = criterion_title(an.selection)
        lines += [
            f"## Tuned view: each method's best configuration per dataset by {title}",
            "",
            f"Caution: the configurations were chosen on {title}, so this view flatters "
            "every method (the pick was made on the very numbers shown).",
            "",
        ]
        for table in tuned:
            lines += [f"### {fmt.md_text(table.title)}", ""] + _md_table(table) + [""]
    return "\n".join(lines)


def _tex_cell(c: dict) -> str:
    text = fmt.tex_text(c["text"]).replace(" ± ", r" $\pm$ ").replace("–", "--")
    return f"\\textbf{{{text}}}" if c["best"] else text


def leaderboard_latex(an: Analysis) -> str:
    """A booktabs table: the leaderboard in the verdict's order, then one block per dataset.
    Needs ``\\usepackage{booktabs}``."""
    board = overall_table(an)
    width = len(board.header)
    lines = [
        "% lowdim leaderboard; needs \\usepackage{booktabs}",
        f"% {verdict(an)}".replace("\n", " "),
        f"\\begin{{tabular}}{{rl{'r' * (width - 2)}}}",
        "\\toprule",
        " & ".join(fmt.tex_text(h) for h in board.header) + " \\\\",
        "\\midrule",
    ]
    lines += [" & ".join(_tex_cell(c) for c in row) + " \\\\" for row in board.rows]
    lines += ["\\bottomrule", "\\end{tabular}", ""]
    for table in dataset_tables(an):
        cols = "l" + "r" * (len(table.header) - 1)
        lines += [
            f"% {fmt.tex_text(table.title)}",
            f"\\begin{{tabular}}{{{cols}}}",
            "\\toprule",
            f"\\multicolumn{{{len(table.header)}}}{{l}}{{{fmt.tex_text(table.title)}}} \\\\",
            " & ".join(fmt.tex_text(h) for h in table.header) + " \\\\",
            "\\midrule",
        ]
        lines += [" & ".join(_tex_cell(c) for c in row) + " \\\\" for row in table.rows]
        lines += ["\\bottomrule", "\\end{tabular}", ""]
    return "\n".join(lines)


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _test_entry(an: Analysis, tests: CriterionTests) -> dict:
    f = tests.friedman
    entry: dict[str, Any] = {
        "higher_is_better": tests.higher_is_better,
        "n_blocks": tests.n_blocks,
        "n_configurations": tests.n_configurations,
        "mean_ranks": {m: float(r) for m, r in tests.mean_ranks.items()},
        "friedman": None,
        "nemenyi": None,
        "pairwise": None,
    }
    if f is not None:
        entry["friedman"] = {
            "statistic": f.statistic,
            "p_value": f.p_value,
            "p_method": f.p_method,
            "p_method_text": test_form(tests),
            "monte_carlo_draws": f.draws,
            "chi2_p": f.chi2_p,
            "iman_davenport_f": _finite(f.iman_davenport_f),
            "iman_davenport_p": _finite(f.iman_davenport_p),
            "rejects": tests.rejects,
        }
        entry["nemenyi"] = {
            "alpha": tests.alpha,
            "q_alpha": tests.q_alpha,
            "critical_difference": tests.critical_difference,
        }
    if tests.pairs:
        entry["pairwise"] = {
            "test": "Wilcoxon signed-rank, two-sided, on the paired block values; Holm's "
            "correction over the comparisons of the winner with each other configuration",
            "against": an.winner,
            "pairs": [
                {
                    "other": p.other,
                    "n_blocks": p.n_blocks,
                    "statistic": p.statistic,
                    "p_value": p.p_value,
                    "p_holm": p.p_holm,
                    "method": p.method,
                    "median_difference": p.median_difference,
                }
                for p in tests.pairs
            ],
        }
    return entry


def stats_json(an: Analysis) -> str:
    """The verdict and every test, as documented in DEVELOPERS.md (``stats.json``)."""
    data = {
        "winner": an.winner,
        "order": [{"place": an.position[m], "configuration": m} for m in an.order],
        "verdict": verdict(an),
        "strength": strength(an),
        "selection": an.selection,
        "headline": an.headline,
        "alpha": an.settings.alpha,
        "tie_break": an.settings.tie_break,
        "blocks": {
            "kind": an.settings.blocks,
            "description": blocks_phrase(an),
            "names": an.blocks,
            "n": len(an.blocks),
        },
        "criteria": {key: _test_entry(an, an.tests[key]) for key in an.criteria},
    }
    return json.dumps(data, indent=2, allow_nan=False) + "\n"


def scores_frame(an: Analysis) -> pd.DataFrame:
    """Every stored score of the run's jobs, long form, with display labels, sorted."""
    jobs = an.results.jobs[["job_id", "data", "config", "seed"]]
    rows = an.results.scores.merge(jobs, on="job_id", how="inner")
    rows = rows.sort_values(["data", "config", "seed", "metric", "k"], kind="stable")
    return pd.DataFrame(
        {
            "job_id": rows["job_id"].astype(str),
            "dataset": rows["data"].astype(str),
            "method": rows["config"].astype(str),
            "seed": rows["seed"].astype("int64"),
            "metric": rows["metric"].astype(str),
            "k": rows["k"].astype("int64"),
            "value": rows["value"].astype(float),
        }
    ).reset_index(drop=True)


def scores_csv(frame: pd.DataFrame) -> str:
    """The CSV of :func:`scores_frame` (values with ``repr``, labels neutralised)."""
    out = frame.copy()
    for col in ("dataset", "method", "metric"):
        out[col] = out[col].map(fmt.csv_text)
    out["value"] = [_full(v) for v in out["value"]]
    buffer = io.StringIO()
    out.to_csv(buffer, index=False, lineterminator="\n")
    return buffer.getvalue()


def scores_parquet(frame: pd.DataFrame) -> bytes | None:
    """The Parquet twin of :func:`scores_csv` (same rows, typed columns); None without pyarrow."""
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        return None
    sink = io.BytesIO()
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), sink)
    return sink.getvalue()
