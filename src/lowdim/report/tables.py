"""Leaderboard files: CSV (long form), Markdown and LaTeX (booktabs, best per column bold)."""

from __future__ import annotations

import math
import re

import pandas as pd

__all__ = ["fmt", "mean_sd", "leaderboard_csv", "leaderboard_markdown", "leaderboard_latex"]


def fmt(value: float, digits: int = 3) -> str:
    """A number for a table: ``digits`` significant figures, a dash for NaN."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "–"
    return f"{value:.{digits}g}"


def mean_sd(mean: float, sd: float) -> str:
    """``0.912 ± 0.004``; the mean alone when there is one seed."""
    if sd is None or not math.isfinite(sd):
        return fmt(mean)
    return f"{fmt(mean)} ± {fmt(sd, 2)}"


def natural_key(text: str) -> list:
    """Sort key putting ``n=40`` before ``n=160``: digit runs compare as numbers."""
    return [
        (0, float(t), "") if t[:1].isdigit() else (1, 0.0, t)
        for t in re.findall(r"\d+(?:\.\d+)?|\D+", str(text))
    ]


def natural_order(values: pd.Series) -> pd.Series:
    """:func:`natural_key` for ``DataFrame.sort_values(key=...)``."""
    order = {v: i for i, v in enumerate(sorted(set(values), key=natural_key))}
    return values.map(order)


def leaderboard_csv(board: pd.DataFrame) -> str:
    """The long-form leaderboard with values at full precision (``repr`` round-trips)."""
    out = board.copy()
    for col in ("mean", "sd", "rank"):
        out[col] = [repr(float(v)) if pd.notna(v) else "" for v in out[col]]
    return out.to_csv(index=False, lineterminator="\n")


def _best(values: pd.Series, higher: bool) -> set:
    finite = values.dropna()
    if finite.empty:
        return set()
    target = finite.max() if higher else finite.min()
    return set(finite.index[finite == target])


def _md_cell(text: str) -> str:
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")


def _md_table(header: list[str], rows: list[list[str]]) -> list[str]:
    lines = ["| " + " | ".join(_md_cell(h) for h in header) + " |"]
    lines.append("| " + " | ".join(["---"] + ["---:"] * (len(header) - 1)) + " |")
    lines.extend("| " + " | ".join(_md_cell(c) for c in row) + " |" for row in rows)
    return lines


def _per_dataset(board: pd.DataFrame, dataset: str, keys: list[str]) -> pd.DataFrame:
    part = board[(board["scope"] == "dataset") & (board["dataset"] == dataset)]
    return part[part["criterion"].isin(keys)]


def leaderboard_markdown(
    board: pd.DataFrame,
    overall: pd.Series,
    keys: list[str],
    criteria: dict[str, bool],
    tuned: pd.DataFrame,
    selection: str,
) -> str:
    """Mean ranks, then one table per dataset, then the tuned view, best values in bold."""
    lines = ["# Leaderboard", ""]
    lines.append(
        "Mean rank over datasets per criterion (1 = best, ties averaged); `overall` is the mean "
        "over the criteria shown. Every configuration of every method is ranked."
    )
    lines.append("")
    ranks = board[board["scope"] == "overall"].pivot_table(
        index="method", columns="criterion", values="rank", aggfunc="first"
    )
    rows = []
    for method in overall.index:
        cells = [method]
        for key in keys:
            value = ranks.at[method, key] if key in ranks and method in ranks.index else math.nan
            best = key in ranks and value == ranks[key].min()
            text = "–" if not math.isfinite(value) else f"{value:.2f}"
            cells.append(f"**{text}**" if best else text)
        cells.append(f"{overall[method]:.2f}")
        rows.append(cells)
    lines += _md_table(["method", *keys, "overall"], rows) + [""]
    for dataset in sorted(
        board.loc[board["scope"] == "dataset", "dataset"].unique(), key=natural_key
    ):
        part = _per_dataset(board, dataset, keys)
        lines += [f"## {_md_cell(dataset)}", ""]
        lines += _md_table(["method", *keys], _cells(part, keys, criteria, bold=("**", "**")))
        lines.append("")
    if not tuned.empty:
        lines += [
            f"## Tuned view: each method's best configuration per dataset by `{selection}`",
            "",
        ]
        lines.append(
            f"Caution: the configurations were chosen on `{selection}`, so its column here is "
            "optimistic (chosen on the very numbers it reports)."
        )
        lines.append("")
        for dataset in sorted(tuned["dataset"].unique(), key=natural_key):
            part = tuned[(tuned["dataset"] == dataset) & tuned["criterion"].isin(keys)]
            pick = part.drop_duplicates("method").set_index("method")["configuration"]
            lines += [f"### {_md_cell(dataset)}", ""]
            header = ["method", "configuration", *keys]
            body = _cells(part.assign(rank=math.nan), keys, criteria, bold=("**", "**"))
            lines += _md_table(header, [[r[0], pick.get(r[0], ""), *r[1:]] for r in body])
            lines.append("")
    return "\n".join(lines)


def _cells(part: pd.DataFrame, keys: list[str], criteria: dict[str, bool], bold: tuple) -> list:
    rows = []
    methods = sorted(part["method"].unique())
    best = {
        k: _best(part[part["criterion"] == k].set_index("method")["mean"], criteria[k])
        for k in keys
    }
    for method in methods:
        cells = [method]
        for key in keys:
            hit = part[(part["method"] == method) & (part["criterion"] == key)]
            if hit.empty or pd.isna(hit["mean"].iloc[0]):
                cells.append("–")
                continue
            r = hit.iloc[0]
            text = mean_sd(r["mean"], r["sd"])
            if pd.notna(r.get("rank", math.nan)):
                text += f" ({r['rank']:g})"
            cells.append(f"{bold[0]}{text}{bold[1]}" if method in best[key] else text)
        rows.append(cells)
    return rows


_TEX = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
    "<": r"\textless{}",
    ">": r"\textgreater{}",
}


def tex_escape(text: str) -> str:
    """Escape LaTeX's special characters in user-supplied text."""
    return "".join(_TEX.get(ch, ch) for ch in str(text))


def leaderboard_latex(
    board: pd.DataFrame, overall: pd.Series, keys: list[str], criteria: dict[str, bool]
) -> str:
    """A booktabs table: one block per dataset (mean ± sd over seeds, best per column bold),
    then the mean ranks. Needs ``\\usepackage{booktabs}``."""
    cols = "ll" + "r" * len(keys)
    head = " & ".join(
        ["dataset", "method"]
        + [tex_escape(k) + (r" $\uparrow$" if criteria[k] else r" $\downarrow$") for k in keys]
    )
    lines = [
        "% lowdim leaderboard; needs \\usepackage{booktabs}",
        f"\\begin{{tabular}}{{{cols}}}",
        "\\toprule",
        head + " \\\\",
        "\\midrule",
    ]
    datasets = sorted(board.loc[board["scope"] == "dataset", "dataset"].unique(), key=natural_key)
    for i, dataset in enumerate(datasets):
        part = _per_dataset(board, dataset, keys).assign(rank=math.nan)
        for j, row in enumerate(_cells(part, keys, criteria, bold=("\\textbf{", "}"))):
            name = tex_escape(dataset) if j == 0 else ""
            cells = [_tex_value(c) for c in row[1:]]
            lines.append(" & ".join([name, tex_escape(row[0]), *cells]) + " \\\\")
        if i < len(datasets) - 1:
            lines.append("\\midrule")
    ranks = board[board["scope"] == "overall"].pivot_table(
        index="method", columns="criterion", values="rank", aggfunc="first"
    )
    lines.append("\\midrule")
    for j, method in enumerate(overall.index):
        cells = []
        for key in keys:
            value = ranks.at[method, key] if key in ranks and method in ranks.index else math.nan
            text = fmt(value, 3)
            cells.append(
                f"\\textbf{{{text}}}" if key in ranks and value == ranks[key].min() else text
            )
        label = "mean rank" if j == 0 else ""
        lines.append(" & ".join([label, tex_escape(method), *cells]) + " \\\\")
    lines += ["\\bottomrule", "\\end{tabular}", ""]
    return "\n".join(lines)


def _tex_value(cell: str) -> str:
    bold = cell.startswith("\\textbf{")
    inner = cell[len("\\textbf{") : -1] if bold else cell
    inner = inner.replace(" ± ", r" $\pm$ ").replace("–", "--")
    return f"\\textbf{{{inner}}}" if bold else inner
