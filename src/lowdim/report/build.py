"""The report of a run, rebuilt from its store alone.

:func:`build_report` writes into the run's folder:

- ``scores.csv``: every stored score in long form (``job_id, dataset, method, seed, metric,
  k, value``; display labels; values written with ``repr``, which round-trips float64);
- ``stats.json``: per criterion key (``"metric@K"`` for criteria with a neighbourhood size K,
  e.g. ``"trustworthiness@10"``; the bare name otherwise, e.g. ``"rnx_auc"``)
  ``{friedman_chi2, p_value, iman_davenport_f, iman_davenport_p, critical_difference,
  mean_ranks: {method: rank}, n_datasets, n_methods}``; tests that cannot be run (fewer than 2
  datasets or methods) are null; the methods are the configurations as run;
- ``leaderboard.csv`` (long form, full precision), ``leaderboard.md``, ``leaderboard.tex``;
- ``figures/*.png`` and ``report.html``, one self-contained file with the figures inlined.

Each file is written to a temporary name and renamed, so a reader never sees half a file.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from lowdim import __version__
from lowdim.analysis.breakdown import DatasetCache, breakdown_table, seed_stability
from lowdim.analysis.curves import bandwidth_curves, gallery_panels, rnx_curves, scaling_table
from lowdim.analysis.results import (
    Results,
    criteria_in,
    criterion_statistics,
    criterion_table,
    headline_criteria,
    leaderboard,
    load_results,
    overall_mean_ranks,
    summarise,
    tuned_summary,
)
from lowdim.errors import InputError, suggestion
from lowdim.report import figures as plots
from lowdim.report.tables import leaderboard_csv, leaderboard_latex, leaderboard_markdown

__all__ = ["build_report", "Evidence", "gather_evidence", "BREAKDOWN_FRACTION"]

BREAKDOWN_FRACTION = 0.8
"""A method breaks down along a stress axis where its score falls below this share of its best."""


@dataclass
class Evidence:
    """Everything the report shows, computed from the store."""

    results: Results
    table: pd.DataFrame
    summary: pd.DataFrame
    criteria: dict[str, bool]
    headline: list[str]
    selection: str
    board: pd.DataFrame
    overall: pd.Series
    stats: dict[str, dict]
    tuned: pd.DataFrame
    breakdown: pd.DataFrame
    stability: pd.DataFrame
    bandwidth: pd.DataFrame
    scaling: pd.DataFrame
    scaling_fits: pd.DataFrame
    failures: pd.DataFrame
    rnx: pd.DataFrame
    fraction: float = BREAKDOWN_FRACTION
    figures: dict[str, Path] = field(default_factory=dict)
    captions: dict[str, str] = field(default_factory=dict)


def gather_evidence(
    results: Results, selection: str | None = None, cache: DatasetCache | None = None
) -> Evidence:
    """Compute tables, statistics and curves from a loaded store.

    ``selection`` names the criterion that picks each method's best configuration in the
    tuned view (default: the suite's first ``headline`` criterion when it sets one, else the
    first headline criterion, ``rnx_auc`` when present). A suite whose ``headline`` lists
    several criteria (``"name@K"`` entries allowed) sets the headline columns too.
    """
    cache = cache or DatasetCache()
    table = criterion_table(results)
    summary = summarise(table)
    criteria = criteria_in(summary)
    headline = headline_criteria(criteria)
    if selection is not None and selection not in criteria:
        raise InputError(
            f"the selection criterion {selection!r} is not among the criteria scored in "
            f"{str(results.out_dir)!r}{suggestion(selection, criteria)}; give one of "
            f"{', '.join(criteria) or '(none)'}."
        )
    suite_keys = _suite_headline(results, criteria)
    if len(suite_keys) > 1:
        headline = suite_keys  # the suite chose its headline criteria itself
    if selection is None and suite_keys:
        selection = suite_keys[0]
        if selection not in headline:
            headline.insert(0, selection)
    if selection is None:
        selection = headline[0] if headline else next(iter(criteria), "")
    board = leaderboard(summary, criteria)
    tuned = (
        tuned_summary(summary, selection, criteria[selection]) if selection else summary.iloc[0:0]
    )
    jobs = results.jobs
    failures = jobs[jobs["status"] != "ok"][
        ["job_id", "data", "config", "family", "seed", "status", "error"]
    ].rename(columns={"data": "dataset", "config": "method"})
    points, fits = scaling_table(results)
    return Evidence(
        results=results,
        table=table,
        summary=summary,
        criteria=criteria,
        headline=headline,
        selection=selection,
        board=board,
        overall=overall_mean_ranks(summary, criteria, headline),
        stats=criterion_statistics(summary, criteria),
        tuned=tuned,
        breakdown=breakdown_table(
            results,
            table,
            {k: v for k, v in criteria.items() if k in headline},
            BREAKDOWN_FRACTION,
        ),
        stability=seed_stability(results, cache),
        bandwidth=bandwidth_curves(results, table, selection) if selection else pd.DataFrame(),
        scaling=points,
        scaling_fits=fits,
        failures=failures.reset_index(drop=True),
        rnx=rnx_curves(table),
    )


def _suite_headline(results: Results, criteria: dict[str, bool]) -> list[str]:
    """The criterion keys named by the latest suite's ``headline``, in its order.

    An entry ``"name@K"`` is that key; a bare name is a K criterion at its middle K. Entries
    that were not scored are left out; an empty list when the suite names none.
    """
    runs = results.runs
    if runs.empty or "suite_text" not in runs:
        return []
    try:
        suite = tomllib.loads(str(runs.sort_values("run_id")["suite_text"].iloc[-1]))
    except tomllib.TOMLDecodeError:
        return []
    entries = suite.get("suite", {}).get("headline")
    entries = [entries] if isinstance(entries, str) else entries
    if not isinstance(entries, list):
        return []
    keys = []
    for name in entries:
        if not isinstance(name, str):
            continue
        if name in criteria:
            keys.append(name)
            continue
        chosen = headline_criteria({k: v for k, v in criteria.items() if k.split("@")[0] == name})
        keys += chosen[:1]
    return list(dict.fromkeys(keys))


def _draw_figures(ev: Evidence, folder: Path, cache: DatasetCache) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("*.png"):  # figures of an earlier report that no longer apply
        old.unlink()
    panels, notes = gallery_panels(ev.results, cache)
    seed = ev.results.jobs.loc[ev.results.jobs["status"] == "ok", "seed"].min()
    drawn = {
        "gallery": plots.embedding_gallery(panels, folder / "gallery.png"),
        "heatmap": plots.criterion_heatmap(
            ev.summary, ev.selection, ev.criteria.get(ev.selection, True), folder / "heatmap.png"
        )
        if ev.selection
        else None,
        "rnx": plots.rnx_curves(ev.rnx, folder / "rnx_curves.png"),
        "bandwidth": plots.bandwidth_sensitivity(
            ev.bandwidth, ev.selection, folder / "bandwidth.png"
        ),
        "scaling": plots.scaling_curves(ev.scaling, ev.scaling_fits, folder / "scaling.png"),
        "breakdown": plots.breakdown_curves(
            ev.breakdown[ev.breakdown["criterion"] == ev.selection],
            ev.fraction,
            folder / "breakdown.png",
        ),
    }
    entry = ev.stats.get(ev.selection, {})
    drawn["cd"] = plots.critical_difference_diagram(
        entry.get("mean_ranks", {}),
        entry.get("critical_difference"),
        folder / "critical_difference.png",
        f"{ev.selection}: mean ranks, bars of CD/2 (non-overlapping = significant)",
    )
    ev.figures = {k: v for k, v in drawn.items() if v is not None}
    colouring = "labels where the data have them, otherwise the first intrinsic coordinate"
    ev.captions = {
        "gallery": f"Embeddings of seed {seed:g} (at most 6 datasets and 6 configurations), "
        f"coloured by {colouring}. " + " ".join(f"{n}." for n in notes),
        "heatmap": f"{ev.selection}, mean over seeds, per dataset and configuration.",
        "rnx": "R_NX(K), mean over seeds: the share of K-neighbourhoods kept, above chance "
        "(0 = random, 1 = perfect), against K on a log axis.",
        "cd": "Each configuration's mean rank with a bar of half the Nemenyi critical "
        "difference on each side: two configurations differ significantly when their bars do "
        "not overlap (read only when the Friedman test rejects).",
        "bandwidth": f"{ev.selection} against a fixed bandwidth sigma; stars mark what a rule "
        "chose, where the run recorded the chosen sigma (otherwise a dotted line at the rule's "
        "score).",
        "scaling": "Fit time and peak memory against n, log-log; the slope is the fitted "
        "exponent (1 = linear, 2 = quadratic).",
        "breakdown": f"{ev.selection} along each stress axis; a circle marks the breakdown "
        f"point, the first value below {ev.fraction:.0%} of the configuration's own best.",
    }


def _write_text(path: Path, text: str) -> Path:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}-", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)
    return path


def _scores_csv(results: Results) -> str:
    jobs = results.jobs[["job_id", "data", "config", "seed"]]
    rows = results.scores.merge(jobs, on="job_id", how="inner")
    rows = rows.sort_values(["data", "config", "seed", "metric", "k"])
    lines = ["job_id,dataset,method,seed,metric,k,value"]
    frame = pd.DataFrame(
        {
            "job_id": rows["job_id"],
            "dataset": rows["data"],
            "method": rows["config"],
            "seed": rows["seed"].astype(int),
            "metric": rows["metric"],
            "k": rows["k"].astype(int),
            "value": [repr(float(v)) for v in rows["value"]],
        }
    )
    body = frame.to_csv(index=False, header=False, lineterminator="\n")
    return "\n".join(lines) + "\n" + body


def _json_safe(value: object) -> object:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _json_safe(v) for k, v in value.items()}
    return value


def build_report(out_dir: str | Path, *, selection: str | None = None) -> Path:
    """Rebuild every report file of a run from ``out_dir/store.sqlite``; return report.html.

    Parameters
    ----------
    out_dir : path
        The run's folder (holding ``store.sqlite`` and ``embeddings/``).
    selection : str, optional
        Criterion key that picks each method's best configuration in the tuned view.

    Raises
    ------
    InputError
        When ``out_dir`` holds no store, or the store holds no jobs.
    """
    from lowdim.report.html import render_report

    out_dir = Path(out_dir)
    results = load_results(out_dir)
    cache = DatasetCache()
    ev = gather_evidence(results, selection=selection, cache=cache)
    _draw_figures(ev, out_dir / "figures", cache)
    _write_text(out_dir / "scores.csv", _scores_csv(results))
    stats = {k: _json_safe(v) for k, v in ev.stats.items()}
    _write_text(out_dir / "stats.json", json.dumps(stats, indent=2, sort_keys=True) + "\n")
    _write_text(out_dir / "leaderboard.csv", leaderboard_csv(ev.board))
    _write_text(
        out_dir / "leaderboard.md",
        leaderboard_markdown(
            ev.board, ev.overall, ev.headline, ev.criteria, ev.tuned, ev.selection
        ),
    )
    _write_text(
        out_dir / "leaderboard.tex",
        leaderboard_latex(ev.board, ev.overall, ev.headline, ev.criteria),
    )
    return _write_text(out_dir / "report.html", render_report(ev, version=__version__))
