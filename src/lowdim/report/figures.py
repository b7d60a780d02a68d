"""Figures for the report: matplotlib with the Agg backend, styled with seaborn.

Every function takes tidy data (built by :mod:`lowdim.analysis`), writes one PNG to ``path``
(a temporary name first, then a rename) and returns the path, or None when there is nothing
to draw.

The palette
-----------
Methods get the eight colours of :data:`PALETTE`, our own: deep blues alternating with burnt
oranges and straws, i.e. both ends of the blue-yellow opponent axis that red-green colour-blind
readers keep, with CIE L* lightness rising from 23 to 84 in steps of 6 or more so that every
colour stays distinct when printed in grey. On the simulated deuteranope, protanope and
tritanope views (Machado, Oliveira & Fernandes 2009) every pair stays at least 14 CIELAB units
apart. Colour is never the only cue: each method also has its own marker and line style.
Continuous values (intrinsic coordinates, heat maps) use matplotlib's ``cividis``, whose
lightness rises linearly and which was designed for colour-vision deficiency.

References
----------
.. [1] G. M. Machado, M. M. Oliveira and L. A. F. Fernandes, "A physiologically-based model
   for simulation of color vision deficiency", IEEE TVCG 15(6), 1291-1298, 2009.
   https://doi.org/10.1109/TVCG.2009.113
.. [2] J. R. Nuñez, C. R. Anderton and R. S. Renslow, "Optimizing colormaps with
   consideration for color vision deficiency", PLOS ONE 13(7), e0199239, 2018.
   https://doi.org/10.1371/journal.pone.0199239
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import seaborn as sns  # noqa: E402
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter  # noqa: E402

from lowdim._files import atomic_path  # noqa: E402

__all__ = [
    "PALETTE",
    "MARKERS",
    "style_for",
    "embedding_gallery",
    "gap_heatmap",
    "degenerate_embeddings",
    "rnx_curves",
    "critical_difference_diagram",
    "bandwidth_sensitivity",
    "scaling_curves",
    "breakdown_curves",
]

PALETTE = (
    "#00366e",
    "#833b0d",
    "#006dae",
    "#c26a1c",
    "#459fce",
    "#dda121",
    "#8fc7e6",
    "#ecd15c",
)
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*", "h", "<")
_LINESTYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (1, 1)))
_EDGE = "#1a1a1a"
_CMAP = "cividis"
_DPI = 100


def style_for(index: int) -> dict[str, Any]:
    """Colour, marker and line style of the method at ``index`` (cycled)."""
    return {
        "color": PALETTE[index % len(PALETTE)],
        "marker": MARKERS[index % len(MARKERS)],
        "linestyle": _LINESTYLES[index % len(_LINESTYLES)],
    }


def _theme() -> None:
    sns.set_theme(context="paper", style="whitegrid", font_scale=1.0)
    plt.rcParams.update({"axes.titlesize": 9, "axes.labelsize": 8, "legend.fontsize": 7})


def _save(fig: plt.Figure, path: Path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    try:
        with atomic_path(path) as temporary:
            fig.savefig(temporary, dpi=_DPI, bbox_inches="tight", format="png")
    finally:
        plt.close(fig)
    return path


def _log_axis(ax: plt.Axes, which: str) -> None:
    """A log scale labelled 1, 2, 5, 10, 20 ... in plain numbers (no crowded mathtext)."""
    if which == "x":
        ax.set_xscale("log")
        axis = ax.xaxis
    else:
        ax.set_yscale("log")
        axis = ax.yaxis
    axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())


def _grid(n: int, ncols: int) -> tuple[int, int]:
    ncols = max(1, min(ncols, n))
    return math.ceil(n / ncols), ncols


def _method_styles(methods: list[str]) -> dict[str, dict[str, Any]]:
    return {m: style_for(i) for i, m in enumerate(methods)}


_KIND_TEXT = {
    "truth": "first intrinsic coordinate",
    "labels": "class",
    "pc1": "first principal component of the data",
    "order": "row order",
    "quality": "each point's Q_NX (share of its neighbours kept)",
}


def embedding_gallery(panels: list[dict], path: Path) -> Path | None:
    """Datasets (rows) x configurations (columns) of 2-D embeddings, one seed each.

    Each panel is a dict with ``dataset``, ``method``, ``Y`` (n x d, d >= 1), ``colour``
    (values or None) and ``kind`` (``"truth"``, ``"labels"``, ``"pc1"`` or ``"order"``).
    Each row ends with its key: a colour bar for continuous values, a legend for classes.
    """
    if not panels:
        return None
    _theme()
    datasets = list(dict.fromkeys(p["dataset"] for p in panels))
    methods = list(dict.fromkeys(p["method"] for p in panels))
    fig, axes = plt.subplots(
        len(datasets),
        len(methods) + 1,
        figsize=(1.9 * len(methods) + 1.9, 1.9 * len(datasets) + 0.4),
        squeeze=False,
        gridspec_kw={"width_ratios": [1.0] * len(methods) + [0.55]},
    )
    for ax in axes.ravel():
        ax.set_axis_off()
    keyed: set[str] = set()
    for p in panels:
        row = datasets.index(p["dataset"])
        ax = axes[row, methods.index(p["method"])]
        ax.set_axis_on()
        Y = np.asarray(p["Y"], dtype=float)
        y2 = Y[:, 1] if Y.shape[1] > 1 else np.zeros(len(Y))
        colour = p.get("colour")
        size = max(1.5, min(8.0, 4000.0 / max(len(Y), 1)))
        key_ax = axes[row, -1]
        if p["kind"] == "labels" and colour is not None:
            classes = list(dict.fromkeys(np.asarray(colour).tolist()))
            codes = np.array([classes.index(c) for c in np.asarray(colour).tolist()])
            colours = np.array([PALETTE[c % len(PALETTE)] for c in codes])
            ax.scatter(Y[:, 0], y2, c=colours, s=size, linewidths=0, rasterized=True)
            if p["dataset"] not in keyed:
                handles = [
                    plt.Line2D([], [], marker="o", linestyle="none", color=PALETTE[i % 8])
                    for i in range(min(len(classes), 8))
                ]
                names = [_short(str(c), 14) for c in classes[:8]]
                title = "class" + (f" (8 of {len(classes)})" if len(classes) > 8 else "")
                key_ax.legend(
                    handles,
                    names,
                    title=title,
                    loc="center left",
                    fontsize=6,
                    title_fontsize=6,
                    frameon=False,
                )
        else:
            values = np.arange(len(Y)) if colour is None else np.asarray(colour, dtype=float)
            missing = ~np.isfinite(values)
            if missing.any():  # points outside a sampled set of query rows
                ax.scatter(
                    Y[missing, 0], y2[missing], c="#cccccc", s=size, linewidths=0, rasterized=True
                )
            bounds = {"vmin": 0.0, "vmax": 1.0} if p["kind"] == "quality" else {}
            points = ax.scatter(
                Y[~missing, 0],
                y2[~missing],
                c=values[~missing],
                cmap=_CMAP,
                s=size,
                linewidths=0,
                rasterized=True,
                **bounds,
            )
            if p["dataset"] not in keyed:
                bar = fig.colorbar(points, ax=key_ax, fraction=0.5, aspect=12, location="left")
                bar.set_label(_wrap(_KIND_TEXT.get(p["kind"], p["kind"]), 22), fontsize=6)
                bar.ax.tick_params(labelsize=6)
        keyed.add(p["dataset"])
        ax.set_xticks([])
        ax.set_yticks([])
        for spine in ax.spines.values():
            spine.set_color("#bbbbbb")
    for j, m in enumerate(methods):
        axes[0, j].set_title(_wrap(m, 24), fontsize=7)
    for i, d in enumerate(datasets):
        axes[i, 0].set_axis_on()
        axes[i, 0].set_ylabel(_wrap(d, 24), fontsize=7)
    fig.subplots_adjust(hspace=0.08, wspace=0.08)
    return _save(fig, path)


def degenerate_embeddings(panels: list[dict], path: Path) -> Path | None:
    """One small picture per degenerate embedding, titled with what was found.

    Each panel is a dict with ``dataset``, ``method``, ``finding``, ``Y``, ``colour`` and
    ``kind`` (as in :func:`embedding_gallery`).
    """
    if not panels:
        return None
    _theme()
    rows, cols = _grid(len(panels), 3)
    fig, axes = plt.subplots(rows, cols, figsize=(2.6 * cols, 2.7 * rows), squeeze=False)
    for ax in axes.ravel():
        ax.set_axis_off()
    for ax, p in zip(axes.ravel(), panels, strict=False):
        ax.set_axis_on()
        Y = np.asarray(p["Y"], dtype=float)
        y2 = Y[:, 1] if Y.shape[1] > 1 else np.zeros(len(Y))
        colour = p.get("colour")
        size = max(1.5, min(8.0, 3000.0 / max(len(Y), 1)))
        if p["kind"] == "labels" and colour is not None:
            classes = list(dict.fromkeys(np.asarray(colour).tolist()))
            codes = [classes.index(c) for c in np.asarray(colour).tolist()]
            ax.scatter(Y[:, 0], y2, c=[PALETTE[c % 8] for c in codes], s=size, linewidths=0)
        else:
            values = np.arange(len(Y)) if colour is None else np.asarray(colour, dtype=float)
            ax.scatter(Y[:, 0], y2, c=values, cmap=_CMAP, s=size, linewidths=0)
        ax.set_xticks([])
        ax.set_yticks([])
        title = (
            f"{_short(p['finding'], 30)}\n{_short(p['method'], 32)}\n{_short(p['dataset'], 32)}"
        )
        ax.set_title(title, fontsize=7)
    fig.subplots_adjust(hspace=0.55, wspace=0.15)
    return _save(fig, path)


def _wrap(text: str, width: int) -> str:
    """Break a long label before its parameters, then shorten each line to ``width``."""
    text = str(text)
    if len(text) > width and "(" in text[1:]:
        head, _, tail = text.partition("(")
        return f"{_short(head, width)}\n{_short('(' + tail, width)}"
    return _short(text, width)


def _short(text: str, width: int) -> str:
    text = str(text)
    return text if len(text) <= width else text[: width - 1] + "…"


def gap_heatmap(gaps: pd.DataFrame, criterion: str, order: list[str], path: Path) -> Path | None:
    """Datasets x configurations, each cell coloured by its gap to the best on that dataset.

    ``gaps`` is :func:`lowdim.analysis.ranking.gaps_to_best` for one criterion; the cell shows
    the gap in the criterion's units (0 = the best there). Configurations go in ``order``.
    """
    part = gaps[gaps["criterion"] == criterion]
    if part.empty:
        return None
    _theme()
    wide = part.pivot_table(index="dataset", columns="method", values="gap", aggfunc="first")
    wide = wide.reindex(columns=[m for m in order if m in wide.columns])
    fig, ax = plt.subplots(figsize=(1.4 + 0.8 * wide.shape[1], 1.0 + 0.42 * wide.shape[0]))
    sns.heatmap(
        wide,
        ax=ax,
        cmap=_CMAP + "_r",
        vmin=0.0,
        annot=wide.shape[0] * wide.shape[1] <= 400,
        fmt=".3f",
        annot_kws={"fontsize": 7},
        linewidths=0.5,
        linecolor="white",
        cbar_kws={"label": f"gap to the best on the dataset ({criterion})"},
    )
    ax.set_xlabel("")
    ax.set_ylabel("")
    ax.set_xticklabels(
        [_wrap(t.get_text(), 24) for t in ax.get_xticklabels()], rotation=30, ha="right"
    )
    ax.set_title(f"{criterion}: distance from the best configuration (0 = best, darker = worse)")
    return _save(fig, path)


def rnx_curves(curves: pd.DataFrame, path: Path, max_panels: int = 6) -> Path | None:
    """R_NX(K) against K on a log axis, one panel per dataset, one line per method.

    ``curves`` has columns ``dataset, method, k, mean``.
    """
    if curves.empty or curves["k"].nunique() < 2:
        return None
    _theme()
    datasets = list(dict.fromkeys(curves["dataset"]))[:max_panels]
    styles = _method_styles(sorted(curves["method"].unique()))
    rows, cols = _grid(len(datasets), 3)
    fig, axes = plt.subplots(rows, cols, figsize=(3.3 * cols, 2.6 * rows), squeeze=False)
    for ax in axes.ravel()[len(datasets) :]:
        ax.set_axis_off()
    for ax, d in zip(axes.ravel(), datasets, strict=False):
        for m, g in curves[curves["dataset"] == d].groupby("method"):
            g = g.sort_values("k")
            ax.plot(
                g["k"],
                g["mean"],
                label=m,
                markersize=3,
                markevery=max(1, len(g) // 6),
                markeredgecolor=_EDGE,
                markeredgewidth=0.4,
                **styles[m],
            )
        _log_axis(ax, "x")
        ax.set_title(_short(d, 40))
        ax.set_xlabel("K (neighbourhood size)")
        ax.set_ylabel("R_NX(K)")
        ax.axhline(0.0, color="#888888", linewidth=0.6)
    fig.subplots_adjust(hspace=0.6, wspace=0.35)
    _legend(fig, axes[0, 0])
    return _save(fig, path)


def _legend(fig: plt.Figure, ax: plt.Axes) -> None:
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        fig.legend(
            handles,
            labels,
            loc="upper center",
            bbox_to_anchor=(0.5, 0.0),
            ncol=min(4, len(labels)),
            frameon=False,
            fontsize=7,
        )


def critical_difference_diagram(
    mean_ranks: dict[str, float], cd: float, path: Path, title: str, stamp: str | None = None
) -> Path | None:
    """Mean ranks with a bar of half the critical difference on each side.

    Each method is one row, best (lowest mean rank) at the top. Two methods differ
    significantly (Nemenyi, at the level of ``cd``) exactly when their bars do not overlap;
    a ruler of length CD is drawn above the axis. ``stamp`` (e.g. "not significant") is
    written across the chart when the omnibus test did not reject, so the bars are not read.
    """
    if len(mean_ranks) < 2 or cd is None or not math.isfinite(cd):
        return None
    _theme()
    items = sorted(mean_ranks.items(), key=lambda t: t[1])
    k = len(items)
    fig, ax = plt.subplots(figsize=(6.4, 0.9 + 0.34 * k))
    best = items[0][1]
    for row, (_name, rank) in enumerate(items):
        overlaps_best = abs(rank - best) <= cd
        colour = PALETTE[0] if overlaps_best else PALETTE[3]
        ax.plot(
            [rank - cd / 2, rank + cd / 2],
            [row, row],
            color=colour,
            linewidth=4,
            alpha=0.55,
            solid_capstyle="butt",
        )
        ax.plot(rank, row, marker="o", color=colour, markeredgecolor=_EDGE, markersize=6)
        ax.text(rank + cd / 2 + 0.05, row, f"{rank:.2f}", va="center", fontsize=7)
    ax.set_yticks(range(k))
    ax.set_yticklabels([_short(n, 44) for n, _ in items], fontsize=8)
    ax.invert_yaxis()
    lo = min(1.0, items[0][1] - cd / 2) - 0.2
    hi = max(float(k), items[-1][1] + cd / 2) + 0.5
    ax.set_xlim(lo, hi)
    ax.set_xlabel("mean rank (1 = best)")
    ax.plot([lo + 0.25, lo + 0.25 + cd], [-0.9, -0.9], color=_EDGE, linewidth=1.5, clip_on=False)
    ax.text(lo + 0.35 + cd, -0.9, f"CD = {cd:.2f}", ha="left", va="center", fontsize=7)
    ax.set_ylim(k - 0.5, -1.4)
    ax.set_title(title, loc="left")
    ax.grid(axis="y", visible=False)
    if stamp:
        ax.text(
            0.5,
            0.5,
            stamp,
            transform=ax.transAxes,
            ha="center",
            va="center",
            fontsize=15,
            color=PALETTE[1],
            alpha=0.8,
            rotation=12,
            bbox={"boxstyle": "round", "facecolor": "white", "edgecolor": PALETTE[1]},
        )
    return _save(fig, path)


def bandwidth_sensitivity(
    curves: pd.DataFrame, criterion: str, path: Path, max_panels: int = 6
) -> Path | None:
    """Criterion against numeric bandwidth (log axis), with the rules' picks marked.

    ``curves`` has columns ``family, held, dataset, method, bandwidth, rule, picked, score``.
    A rule whose chosen sigma is known (``picked``) is a labelled star at that sigma; one
    without is a dotted horizontal line at its score, labelled "(sigma not recorded)".
    """
    if curves.empty:
        return None
    # A panel needs at least one sigma on the log axis: a fixed value or a rule's recorded pick.
    placed = (curves["rule"] == "") | np.isfinite(curves["picked"].astype(float))
    panel = [curves["family"], curves["held"], curves["dataset"]]
    curves = curves[placed.groupby(panel).transform("any")]
    if curves.empty:
        return None
    _theme()
    keys = list(
        dict.fromkeys(zip(curves["family"], curves["held"], curves["dataset"], strict=True))
    )[:max_panels]
    rows, cols = _grid(len(keys), 3)
    fig, axes = plt.subplots(rows, cols, figsize=(3.4 * cols, 2.7 * rows), squeeze=False)
    for ax in axes.ravel()[len(keys) :]:
        ax.set_axis_off()
    for ax, (family, held, dataset) in zip(axes.ravel(), keys, strict=False):
        g = curves[
            (curves["family"] == family)
            & (curves["held"] == held)
            & (curves["dataset"] == dataset)
        ]
        numeric = g[g["rule"] == ""].sort_values("bandwidth")
        ax.plot(
            numeric["bandwidth"],
            numeric["score"],
            markeredgecolor=_EDGE,
            markeredgewidth=0.4,
            markersize=4,
            label="fixed sigma",
            **style_for(0),
        )
        for i, (_, r) in enumerate(g[g["rule"] != ""].iterrows(), start=1):
            st = style_for(i)
            if math.isfinite(r["picked"]):
                ax.plot(
                    r["picked"],
                    r["score"],
                    marker="*",
                    markersize=11,
                    linestyle="none",
                    color=st["color"],
                    markeredgecolor=_EDGE,
                    markeredgewidth=0.5,
                    label=f"rule {r['rule']}",
                )
            else:
                ax.axhline(
                    r["score"],
                    color=st["color"],
                    linestyle=":",
                    linewidth=1.2,
                    label=f"rule {r['rule']} (sigma not recorded)",
                )
        _log_axis(ax, "x")
        ax.set_xlabel("bandwidth sigma")
        ax.set_ylabel(criterion)
        title = _short(f"{family} on {dataset}", 44)
        ax.set_title(title + (f"\n{_short(held, 48)}" if held else ""), fontsize=8)
        ax.legend(fontsize=6, frameon=False)
    fig.subplots_adjust(hspace=0.6, wspace=0.35)
    return _save(fig, path)


def scaling_curves(
    scaling: pd.DataFrame, fits: pd.DataFrame, path: Path, stops: pd.DataFrame | None = None
) -> Path | None:
    """Fit time and peak memory against n on log-log axes, with each method's fitted slope.

    ``scaling`` has ``method, n_samples, fit_seconds, peak_mb``; ``fits`` has ``method,
    quantity, slope``; ``stops`` (``method, n_samples, status``) marks, on the axis of the
    limit that stopped it, the first n where a method hit its time or memory limit.
    """
    if scaling.empty or scaling["n_samples"].nunique() < 2:
        return None
    _theme()
    styles = _method_styles(sorted(scaling["method"].unique()))
    fig, axes = plt.subplots(1, 2, figsize=(8.6, 3.4), squeeze=False)
    for ax, (quantity, label) in zip(
        axes[0], (("fit_seconds", "fit time (s)"), ("peak_mb", "peak memory (MB)")), strict=True
    ):
        for m, g in scaling.groupby("method"):
            g = g.sort_values("n_samples").dropna(subset=[quantity])
            g = g[g[quantity] > 0]
            if g.empty:
                continue
            slope = fits[(fits["method"] == m) & (fits["quantity"] == quantity)]["slope"]
            tag = (
                f" (slope {slope.iloc[0]:.2f})"
                if len(slope) and math.isfinite(slope.iloc[0])
                else ""
            )
            ax.plot(
                g["n_samples"],
                g[quantity],
                markersize=4,
                markeredgecolor=_EDGE,
                markeredgewidth=0.4,
                label=_short(m, 30) + tag,
                **styles[m],
            )
        limit = "timeout" if quantity == "fit_seconds" else "memory"
        for _, stop in (stops if stops is not None else pd.DataFrame()).iterrows():
            if stop["status"] != limit or stop["method"] not in styles or not ax.lines:
                continue
            top = max(line.get_ydata().max() for line in ax.lines)
            ax.plot(
                stop["n_samples"],
                top,
                marker="X",
                markersize=9,
                linestyle="none",
                color=styles[stop["method"]]["color"],
                markeredgecolor=_EDGE,
                label=f"{_short(stop['method'], 24)}: {limit} at n = {int(stop['n_samples']):,}",
            )
        _log_axis(ax, "x")
        _log_axis(ax, "y")
        ax.set_xlabel("n (points)")
        ax.set_ylabel(label)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(fontsize=6, frameon=False)
    fig.subplots_adjust(hspace=0.6, wspace=0.35)
    return _save(fig, path)


def breakdown_curves(
    breakdown: pd.DataFrame, fraction: float, path: Path, max_panels: int = 6
) -> Path | None:
    """Score along each stress axis, one line per method, breakdown points circled.

    ``breakdown`` is :func:`lowdim.analysis.breakdown.breakdown_table` restricted to the
    criteria to show. The dotted line of each method is ``fraction`` of its best along that axis.
    """
    if breakdown.empty:
        return None
    _theme()
    keys = list(
        dict.fromkeys(
            zip(
                breakdown["dataset"],
                breakdown["axis"],
                breakdown["held"],
                breakdown["criterion"],
                strict=True,
            )
        )
    )[:max_panels]
    styles = _method_styles(sorted(breakdown["method"].unique()))
    rows, cols = _grid(len(keys), 2)
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 2.9 * rows), squeeze=False)
    for ax in axes.ravel()[len(keys) :]:
        ax.set_axis_off()
    for ax, (dataset, axis, held, criterion) in zip(axes.ravel(), keys, strict=False):
        part = breakdown[
            (breakdown["dataset"] == dataset)
            & (breakdown["axis"] == axis)
            & (breakdown["held"] == held)
            & (breakdown["criterion"] == criterion)
        ]
        for _, r in part.iterrows():
            st = styles[r["method"]]
            ax.plot(
                r["values"],
                r["scores"],
                markersize=4,
                markeredgecolor=_EDGE,
                markeredgewidth=0.4,
                label=_short(r["method"], 30),
                **st,
            )
            if pd.notna(r["breakdown"]):
                i = r["values"].index(r["breakdown"])
                y = r["scores"][i]
                if not math.isfinite(y):
                    y = ax.get_ylim()[0]
                ax.plot(
                    r["breakdown"],
                    y,
                    marker="o",
                    markersize=11,
                    markerfacecolor="none",
                    markeredgecolor=st["color"],
                    markeredgewidth=1.4,
                    linestyle="none",
                )
        ax.set_xlabel(axis)
        ax.set_ylabel(criterion)
        sub = f" [{held}]" if held else ""
        ax.set_title(_short(f"{dataset}{sub}: along {axis}", 52))
    fig.subplots_adjust(hspace=0.6, wspace=0.3)
    _legend(fig, axes[0, 0])
    fig.suptitle(
        f"circled: first value below {fraction:.0%} of the method's own best", fontsize=8, y=1.0
    )
    return _save(fig, path)
