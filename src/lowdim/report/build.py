"""Every output of a results folder, rendered from one :class:`Analysis` of its store.

:func:`write_tables` writes ``scores.csv`` (and ``scores.parquet``), ``stats.json`` and
``leaderboard.csv|md|tex``; :func:`build_report` adds ``figures/*.png`` and ``report.html``.
Every file goes through :func:`lowdim._files.atomic_path`: written to a temporary name, given
mode 0644 and renamed, so a reader never sees half a file.
"""

from __future__ import annotations

from pathlib import Path

from lowdim import __version__
from lowdim._files import write_bytes, write_text
from lowdim.analysis.curves import degenerate_panels, gallery_panels, quality_panels
from lowdim.analysis.engine import Analysis, analyse_folder
from lowdim.report import figures as plots
from lowdim.report.format import p_value
from lowdim.report.html import render_report
from lowdim.report.narrative import effect_criterion
from lowdim.report.tables import (
    leaderboard_csv,
    leaderboard_latex,
    leaderboard_markdown,
    scores_csv,
    scores_frame,
    scores_parquet,
    stats_json,
)
from lowdim.report.views import criterion_title
from lowdim.run.settings import headline_k

__all__ = ["build_report", "write_tables", "draw_figures"]

# The figures a report may hold; only these are replaced in figures/ when a report is rebuilt.
FIGURES = (
    "gallery",
    "cd",
    "heatmap",
    "rnx",
    "bandwidth",
    "scaling",
    "breakdown",
    "quality",
    "degenerate",
)


def write_tables(an: Analysis) -> list[Path]:
    """Write the scores, the statistics and the leaderboard files; return their paths."""
    out = an.results.out_dir
    frame = scores_frame(an)
    written = [
        write_text(out / "scores.csv", scores_csv(frame)),
        write_text(out / "stats.json", stats_json(an)),
        write_text(out / "leaderboard.csv", leaderboard_csv(an)),
        write_text(out / "leaderboard.md", leaderboard_markdown(an)),
        write_text(out / "leaderboard.tex", leaderboard_latex(an)),
    ]
    parquet = scores_parquet(frame)
    if parquet is not None:
        written.append(write_bytes(out / "scores.parquet", parquet))
    return written


def draw_figures(an: Analysis, folder: Path) -> tuple[dict[str, Path], dict[str, str]]:
    """Draw the report's figures into ``folder``; return the paths drawn and their captions."""
    folder.mkdir(parents=True, exist_ok=True)
    for name in FIGURES:  # a figure of an earlier report that no longer applies goes
        (folder / f"{name}.png").unlink(missing_ok=True)
    leaders = an.leaders()
    panels, notes = gallery_panels(an.results, leaders)
    k = headline_k(sorted({c.k for c in an.settings.criteria if c.k}) or [10])
    quality, quality_key = quality_panels(an.results, leaders[:3], f"qnx@{k}")
    seed = an.results.jobs.loc[an.results.jobs["status"] == "ok", "seed"].min()
    effect = effect_criterion(an)
    sel = an.tests.get(an.selection)
    stamp = None
    if sel is not None and not sel.rejects and sel.friedman is not None:
        stamp = f"not significant ({p_value(sel.friedman.p_value)})"
    drawn = {
        "gallery": plots.embedding_gallery(panels, folder / "gallery.png"),
        "heatmap": plots.gap_heatmap(an.gaps, effect, an.order, folder / "heatmap.png")
        if effect
        else None,
        "rnx": plots.rnx_curves(an.rnx, folder / "rnx.png"),
        "bandwidth": plots.bandwidth_sensitivity(an.bandwidth, effect, folder / "bandwidth.png"),
        "scaling": plots.scaling_curves(
            an.scaling, an.scaling_fits, folder / "scaling.png", an.scaling_stops
        ),
        "breakdown": plots.breakdown_curves(
            an.breakdown[an.breakdown["criterion"] == effect],
            an.fraction,
            folder / "breakdown.png",
        ),
        "quality": plots.embedding_gallery(quality, folder / "quality.png"),
        "degenerate": plots.degenerate_embeddings(
            degenerate_panels(an.results, an.diagnoses), folder / "degenerate.png"
        ),
        "cd": plots.critical_difference_diagram(
            dict(sel.mean_ranks) if sel is not None else {},
            sel.critical_difference if sel is not None else None,
            folder / "cd.png",
            f"{criterion_title(an.selection)}: mean ranks, bars of CD/2",
            stamp=stamp,
        ),
    }
    figures = {k: v for k, v in drawn.items() if v is not None}
    title = criterion_title(effect)
    captions = {
        "gallery": f"The leading configurations ({', '.join(leaders)}), seed {seed:g}, on at "
        "most 6 datasets, coloured by the first intrinsic coordinate where the data have one, "
        "by the labels otherwise, else by the first principal component of the data. "
        + " ".join(f"{n}." for n in notes),
        "heatmap": f"Each configuration's gap to the best one on each dataset, in {title} "
        "(mean over seeds; 0 = the best there).",
        "rnx": "R_NX(K), mean over seeds: the share of K-neighbourhoods kept, above chance "
        "(0 = random, 1 = perfect), against K on a log axis.",
        "cd": "Each configuration's mean rank on the selection with a bar of half the Nemenyi "
        "critical difference on each side; read the bars only where Friedman's test rejects "
        "(the chart is stamped otherwise). The pairwise table in Statistics is the primary "
        "post-hoc evidence.",
        "bandwidth": f"{title} against a fixed bandwidth sigma; stars mark what a rule chose, "
        "where the run recorded the chosen sigma (otherwise a dotted line at the rule's score).",
        "scaling": "Fit time and peak memory against n, log-log; the slope is the fitted "
        "exponent (1 = linear, 2 = quadratic); a cross marks the first n at which a method hit "
        "its time limit (left) or its memory limit (right).",
        "breakdown": f"{title} along each stress axis; a circle marks the breakdown point, the "
        f"first value below {an.fraction:.0%} of the configuration's own best.",
        "quality": f"Where each map keeps and loses neighbourhoods: every point coloured by its "
        f"own Q_NX ({quality_key}: the share of its {quality_key.partition('@')[2]} nearest "
        "neighbours in the data that are also its nearest in the embedding; 1 = all kept, "
        "0 = none). Dark patches are where the map tears or glues; grey points lie outside a "
        "sampled set of query rows.",
        "degenerate": "Embeddings in which a degeneracy was found (first seed), titled with "
        "what was found; the table above gives the evidence.",
    }
    return figures, captions


def build_report(
    out_dir: str | Path, *, selection: str | None = None, analysis: Analysis | None = None
) -> Path:
    """Rebuild every output of a results folder from its store alone; return report.html.

    ``selection`` overrides the run's selection criterion (see :func:`analyse`).
    ``analysis``, when the caller has just analysed the same store, is used as it is.

    Raises
    ------
    InputError
        When ``out_dir`` holds no store, or the store no settings record or no jobs.
    """
    an = analysis if analysis is not None else analyse_folder(Path(out_dir), selection=selection)
    write_tables(an)
    figures, captions = draw_figures(an, an.results.out_dir / "figures")
    html = render_report(an, figures, captions, __version__)
    return write_text(an.results.out_dir / "report.html", html)
