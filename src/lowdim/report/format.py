"""How numbers and user-supplied text are written, in one place for every output.

Scores are printed with :data:`DECIMALS` fixed decimals, so that differences stay visible
(0.9996 is not printed as 1) and columns line up; mean ranks with two. Text that a user chose
(dataset and method labels, file names) is neutralised for each target: a leading ``=``,
``+``, ``-``, ``@``, tab or carriage return gets an apostrophe in CSV (the usual remedy for
formula injection in spreadsheets), markup is escaped in Markdown, special characters in LaTeX.
"""

from __future__ import annotations

import html
import math
from typing import Any

__all__ = [
    "DECIMALS",
    "RANK_DECIMALS",
    "number",
    "mean_sd",
    "rank",
    "p_value",
    "csv_text",
    "md_text",
    "tex_text",
]

DECIMALS = 4
RANK_DECIMALS = 2
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and not math.isfinite(value))


def number(value: Any, decimals: int = DECIMALS) -> str:
    """A score with ``decimals`` fixed decimals; a dash for a missing value."""
    if _missing(value):
        return "–"
    return f"{float(value):.{decimals}f}"


def mean_sd(mean: Any, sd: Any, decimals: int = DECIMALS) -> str:
    """``0.9123 ± 0.0041``; the mean alone when there is no spread (one seed)."""
    if _missing(sd):
        return number(mean, decimals)
    return f"{number(mean, decimals)} ± {number(sd, decimals)}"


def rank(value: Any) -> str:
    """A mean rank with two decimals."""
    return number(value, RANK_DECIMALS)


def p_value(p: Any) -> str:
    """``p = 0.031`` style text of a p-value (``p < 0.001`` below), ``n/a`` when missing."""
    if _missing(p):
        return "n/a"
    return "p < 0.001" if p < 0.001 else f"p = {p:.3f}"


def csv_text(value: Any) -> str:
    """User text for a CSV cell, with a leading apostrophe where a spreadsheet would read a
    formula."""
    text = str(value)
    return "'" + text if text.startswith(_FORMULA_START) else text


def md_text(value: Any) -> str:
    """User text for a Markdown table cell: markup escaped, pipes and line breaks neutralised."""
    text = html.escape(str(value), quote=False)
    return text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ").replace("*", "\\*")


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


def tex_text(value: Any) -> str:
    """Escape LaTeX's special characters in user-supplied text."""
    return "".join(_TEX.get(ch, ch) for ch in str(value))
