"""Terminal renderings of the Analysis: ``run``'s summary and ``compare``'s ranked table."""

from __future__ import annotations

import textwrap

from lowdim.analysis.engine import Analysis
from lowdim.report.narrative import strength, verdict
from lowdim.report.views import Table, overall_table

__all__ = ["fixed_width", "run_summary", "wrap_sentence"]

WIDTH = 99


def fixed_width(table: Table) -> str:
    """A table as aligned text: the configuration column left-aligned, numbers right."""
    rows = [[c["text"] for c in row] for row in table.rows]
    widths = [max(len(r[j]) for r in [table.header, *rows]) for j in range(len(table.header))]
    lines = ["  ".join(h.ljust(w) for h, w in zip(table.header, widths, strict=True)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    for cells in rows:
        lines.append(
            "  ".join(
                c.ljust(w) if j == 1 else c.rjust(w)
                for j, (c, w) in enumerate(zip(cells, widths, strict=True))
            ).rstrip()
        )
    return "\n".join(lines)


def wrap_sentence(sentence: str) -> str:
    """A sentence as a bulleted paragraph of the terminal's width."""
    return textwrap.fill(sentence, width=WIDTH, initial_indent="- ", subsequent_indent="  ")


def run_summary(an: Analysis) -> str:
    """The verdict, its strength and the leaderboard, as ``lowdim run --no-report`` prints it."""
    board = overall_table(an, compact=True)
    parts = [wrap_sentence(verdict(an)), wrap_sentence(strength(an)), "", fixed_width(board)]
    parts += ["", textwrap.fill(board.note, width=WIDTH)]
    return "\n".join(parts)
