"""report.html: one self-contained page (inline CSS, figures as data URIs, no script, no links
outside the page). Every string that comes from the user or the store goes through
:func:`esc`; markup built here is wrapped in :class:`Raw` so the two never mix by accident."""

from __future__ import annotations

import base64
import html
import json
import math
from pathlib import Path
from typing import Any

import pandas as pd

from lowdim.analysis.results import rank_table
from lowdim.report.narrative import method_profiles, statistics_reading
from lowdim.report.tables import fmt, mean_sd, natural_key, natural_order

__all__ = ["render_report", "esc", "Raw"]


class Raw(str):
    """Markup made by this module, inserted as it is."""


def esc(value: Any) -> str:
    """Escape anything for HTML text and attribute values; Raw passes through."""
    return value if isinstance(value, Raw) else html.escape(str(value), quote=True)


def _tag(name: str, body: Any = "", cls: str = "", **attrs: str) -> Raw:
    extra = "".join(f' {k.rstrip("_")}="{esc(v)}"' for k, v in attrs.items())
    klass = f' class="{esc(cls)}"' if cls else ""
    return Raw(f"<{name}{klass}{extra}>{esc(body)}</{name}>")


def _join(parts: list[Any]) -> Raw:
    return Raw("".join(esc(p) for p in parts))


def _table(header: list[Any], rows: list[list[Any]], cls: str = "") -> Raw:
    head = _join([_tag("th", h) for h in header])
    body = _join([_tag("tr", _join([_tag("td", c) for c in row])) for row in rows])
    return _tag(
        "div",
        _tag("table", _join([_tag("thead", _tag("tr", head)), _tag("tbody", body)]), cls=cls),
        cls="scroll",
    )


def _figure(path: Path | None, caption: str, alt: str) -> Raw:
    if path is None or not Path(path).is_file():
        return Raw("")
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    img = Raw(f'<img src="data:image/png;base64,{data}" alt="{esc(alt)}">')
    return _tag("figure", _join([img, _tag("figcaption", caption)]))


def _section(anchor: str, title: str, parts: list[Any]) -> Raw:
    head = Raw(f'<section id="{esc(anchor)}">')
    return _join([head, _tag("h2", title), *parts, Raw("</section>")])


def _para(text: str, cls: str = "") -> Raw:
    return _tag("p", text, cls=cls)


def _bold(text: str) -> Raw:
    return _tag("strong", text)


def _duration(seconds: float) -> str:
    if not math.isfinite(seconds):
        return "unknown"
    if seconds < 120:
        return f"{seconds:.1f} s"
    if seconds < 7200:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


def _wall_seconds(runs: pd.DataFrame, jobs: pd.DataFrame) -> float:
    for frame in (runs, jobs):
        if frame.empty or "started" not in frame or "finished" not in frame:
            continue
        start = pd.to_datetime(frame["started"], errors="coerce", utc=True, format="mixed")
        end = pd.to_datetime(frame["finished"], errors="coerce", utc=True, format="mixed")
        if frame is runs:
            total = (end - start).dt.total_seconds().dropna()
            if len(total):
                return float(total.sum())
        elif start.notna().any() and end.notna().any():
            return float((end.max() - start.min()).total_seconds())
    return math.nan


def _overview(ev: Any) -> Raw:
    jobs, runs = ev.results.jobs, ev.results.runs
    status = jobs["status"].value_counts()
    suites = sorted(set(runs["suite_name"].dropna())) if "suite_name" in runs else []
    facts = [
        ("suite", ", ".join(suites) or "not recorded"),
        ("jobs", f"{len(jobs)} ({', '.join(f'{n} {s}' for s, n in status.items())})"),
        ("datasets", str(jobs["data"].nunique())),
        ("configurations", f"{jobs['config'].nunique()} ({jobs['family'].nunique()} methods)"),
        ("seeds", ", ".join(f"{s:g}" for s in sorted(jobs["seed"].dropna().unique()))),
        ("wall time", _duration(_wall_seconds(runs, jobs))),
        ("fit time, summed", _duration(float(jobs["fit_seconds"].sum(min_count=1) or math.nan))),
    ]
    strip = _tag(
        "dl",
        _join([_tag("div", _join([_tag("dt", k), _tag("dd", v)])) for k, v in facts]),
        cls="facts",
    )
    data = jobs.drop_duplicates("data").sort_values("data", key=natural_order)
    data_rows = [
        [
            r["data"],
            r["dataset"],
            _int(r.get("n_samples")),
            _int(r.get("n_features")),
            _params(r["data_spec"]),
        ]
        for _, r in data.iterrows()
    ]
    conf = jobs.drop_duplicates("config").sort_values("config")
    conf_rows = [[r["config"], r["family"], _params(r["config_spec"])] for _, r in conf.iterrows()]
    return _section(
        "run",
        "What was run",
        [
            strip,
            _tag("h3", "Datasets"),
            _table(["dataset", "source", "n", "D", "parameters"], data_rows),
            _tag("h3", "Method configurations"),
            _table(["configuration", "method", "parameters"], conf_rows),
            _para("Criteria scored: " + ", ".join(ev.criteria) + ".", cls="small"),
        ],
    )


def _int(value: Any) -> str:
    return "–" if value is None or pd.isna(value) else f"{int(value)}"


def _params(spec: dict) -> str:
    return ", ".join(f"{k}={v}" for k, v in spec.items() if v is not None) or "defaults"


def _rank_matrix(ev: Any, summary: pd.DataFrame, keys: list[str]) -> tuple[list, list]:
    methods = sorted(summary["method"].unique())
    tables = {k: rank_table(summary, k, ev.criteria[k], methods) for k in keys}
    means = {k: t.mean(axis=0) for k, t in tables.items()}
    overall = (
        pd.concat(means.values(), axis=1).mean(axis=1).sort_values() if means else pd.Series()
    )
    rows = []
    for m in overall.index:
        cells: list[Any] = [m]
        for k in keys:
            v = means[k].get(m, math.nan)
            cells.append(_bold(f"{v:.2f}") if v == means[k].min() else f"{v:.2f}")
        cells.append(
            _bold(f"{overall[m]:.2f}") if overall[m] == overall.min() else f"{overall[m]:.2f}"
        )
        rows.append(cells)
    header = [f"{k} (N = {tables[k].shape[0]})" for k in keys]
    return ["configuration", *header, "mean over these"], rows


def _leaderboard(ev: Any) -> Raw:
    keys = ev.headline
    header, rows = _rank_matrix(ev, ev.summary, keys)
    parts: list[Any] = [
        _para(
            "Mean rank over the N datasets scored on each headline criterion (1 = best, ties "
            "averaged; a configuration that failed on a dataset takes the last rank there). "
            "Best in bold. "
            "Every configuration is ranked as it was run."
        ),
        _table(header, rows, cls="board"),
        _figure(ev.figures.get("cd"), ev.captions.get("cd", ""), "critical difference diagram"),
        _figure(ev.figures.get("heatmap"), ev.captions.get("heatmap", ""), "heat map"),
    ]
    if not ev.tuned.empty and ev.summary["method"].nunique() > ev.summary["family"].nunique():
        header, rows = _rank_matrix(ev, ev.tuned, keys)
        header[0] = "method (tuned)"
        flatter = (
            f"Each method here is its best configuration on each dataset, chosen by "
            f"{ev.selection}. The {ev.selection} column is therefore flattered: the "
            "configurations were picked on the very numbers it reports, as a grid search would "
            "on test data. Judge the methods on the other columns, or on the table above."
        )
        picks = ev.tuned.drop_duplicates(["dataset", "method"]).sort_values(["dataset", "method"])
        sel = ev.tuned[ev.tuned["criterion"] == ev.selection].set_index(["dataset", "method"])
        pick_rows = [
            [
                r["dataset"],
                r["method"],
                r["configuration"],
                mean_sd(
                    sel.at[(r["dataset"], r["method"]), "mean"],
                    sel.at[(r["dataset"], r["method"]), "sd"],
                ),
            ]
            for _, r in picks.iterrows()
            if (r["dataset"], r["method"]) in sel.index
        ]
        parts += [
            _tag("h3", f"Tuned view: best configuration per dataset by {ev.selection}"),
            _tag("div", flatter, cls="warn"),
            _table(header, rows, cls="board"),
            _tag(
                "details",
                _join(
                    [
                        _tag("summary", "Which configuration was picked where"),
                        _table(["dataset", "method", "picked", ev.selection], pick_rows),
                    ]
                ),
            ),
        ]
    elif not ev.tuned.empty:
        parts.append(
            _para(
                "Each method was run in one configuration, so no tuned view is "
                "needed: the table above is the whole comparison.",
                cls="small",
            )
        )
    return _section("leaderboard", "Leaderboard", parts)


def _per_dataset(ev: Any) -> Raw:
    parts: list[Any] = [
        _figure(ev.figures.get("gallery"), ev.captions.get("gallery", ""), "embedding gallery"),
        _figure(ev.figures.get("rnx"), ev.captions.get("rnx", ""), "R_NX curves"),
    ]
    board = ev.board[ev.board["scope"] == "dataset"]
    for i, dataset in enumerate(sorted(board["dataset"].unique(), key=natural_key)):
        part = board[(board["dataset"] == dataset) & board["criterion"].isin(ev.headline)]
        keys = [k for k in ev.headline if k in set(part["criterion"])]
        rows = []
        for method in sorted(part["method"].unique()):
            cells: list[Any] = [method]
            for key in keys:
                col = part[part["criterion"] == key]
                hit = col[col["method"] == method]
                if hit.empty or pd.isna(hit["mean"].iloc[0]):
                    cells.append("no score (failed)")
                    continue
                r = hit.iloc[0]
                text = f"{mean_sd(r['mean'], r['sd'])} (#{r['rank']:g})"
                cells.append(_bold(text) if r["rank"] == col["rank"].min() else text)
            rows.append(cells)
        body = _join(
            [
                _tag("summary", dataset),
                _table(["configuration", *keys], rows),
                _para("Mean ± sd over seeds, rank within the dataset after #.", cls="small"),
            ]
        )
        attrs = {"open": "open"} if i < 3 else {}
        parts.append(_tag("details", body, **attrs))
    return _section("datasets", "Per dataset", parts)


def _statistics(ev: Any) -> Raw:
    rows = []
    for key, e in ev.stats.items():
        best = min(e["mean_ranks"], key=e["mean_ranks"].get) if e["mean_ranks"] else "–"
        rows.append(
            [
                key,
                e["n_datasets"],
                e["n_methods"],
                fmt(e["friedman_chi2"]),
                _pval(e["p_value"]),
                fmt(e["iman_davenport_f"]),
                _pval(e["iman_davenport_p"]),
                fmt(e["critical_difference"]),
                best,
            ]
        )
    readings = [
        _para(" ".join(statistics_reading(k, ev.stats[k]))) for k in ev.headline if k in ev.stats
    ]
    return _section(
        "statistics",
        "Statistics",
        [
            _para(
                "Friedman's test asks whether the configurations' ranks over datasets differ more "
                "than chance; the Iman-Davenport F is its less conservative form; the Nemenyi "
                "critical difference (CD, level 0.05) is how far apart two mean ranks must be for "
                "that pair to differ (Demšar, JMLR 7, 2006). Datasets are the units of evidence: "
                "seeds are averaged first."
            ),
            _tag("h3", "Reading the headline criteria"),
            *readings,
            _tag(
                "details",
                _join(
                    [
                        _tag("summary", "All criteria"),
                        _table(
                            [
                                "criterion",
                                "N",
                                "k",
                                "chi2_F",
                                "p",
                                "F_F",
                                "p (F)",
                                "CD",
                                "best mean rank",
                            ],
                            rows,
                        ),
                    ]
                ),
            ),
        ],
    )


def _pval(p: float | None) -> Any:
    if p is None:
        return "–"
    text = "< 0.001" if p < 0.001 else f"{p:.3f}"
    return _bold(text) if p < 0.05 else text


def _profiles(ev: Any) -> Raw:
    family_of = dict(zip(ev.results.jobs["config"], ev.results.jobs["family"], strict=True))
    profiles = method_profiles(
        ev.tuned,
        ev.selection,
        ev.criteria.get(ev.selection, True),
        ev.breakdown,
        ev.failures,
        ev.bandwidth,
        ev.stability,
        family_of,
        ev.fraction,
    )
    cards = [
        _tag(
            "div",
            _join([_tag("h3", fam), _tag("ul", _join([_tag("li", s) for s in lines]))]),
            cls="card",
        )
        for fam, lines in profiles.items()
    ]
    parts: list[Any] = [
        _para(
            f"Written from the numbers, per method (its best configuration per dataset by "
            f"{ev.selection}, so these are best cases)."
        ),
        _tag("div", _join(cards), cls="cards"),
        _figure(ev.figures.get("breakdown"), ev.captions.get("breakdown", ""), "breakdown curves"),
        _figure(ev.figures.get("bandwidth"), ev.captions.get("bandwidth", ""), "bandwidth"),
        _figure(ev.figures.get("scaling"), ev.captions.get("scaling", ""), "scaling"),
    ]
    if not ev.scaling_fits.empty:
        fits = ev.scaling_fits.pivot_table(index="method", columns="quantity", values="slope")
        parts.append(
            _table(
                ["configuration", "time slope", "memory slope"],
                [
                    [m, fmt(r.get("fit_seconds", math.nan)), fmt(r.get("peak_mb", math.nan))]
                    for m, r in fits.iterrows()
                ],
            )
        )
    measured = ev.stability[ev.stability["disparity"].notna()]
    if not measured.empty:
        parts += [
            _tag("h3", "Stability across seeds"),
            _table(
                ["dataset", "configuration", "seeds", "Procrustes disparity"],
                [
                    [r["dataset"], r["method"], r["n_seeds"], fmt(r["disparity"])]
                    for _, r in measured.iterrows()
                ],
            ),
        ]
    else:
        notes = sorted(set(ev.stability["note"])) if not ev.stability.empty else []
        parts.append(
            _para(
                "Stability across seeds was not measured: " + "; ".join(notes) + "."
                if notes
                else "Stability across seeds was not measured.",
                cls="small",
            )
        )
    fail = ev.failures
    if fail.empty:
        parts.append(_para("Every job finished.", cls="small"))
    else:
        parts += [
            _tag("h3", f"Jobs that did not finish ({len(fail)})"),
            _table(
                ["dataset", "configuration", "seed", "status", "message"],
                [
                    [r["dataset"], r["method"], f"{r['seed']:g}", r["status"], r["error"] or ""]
                    for _, r in fail.iterrows()
                ],
                cls="fail",
            ),
        ]
    return _section("methods", "Where each method helps and where it fails", parts)


def _reproducibility(ev: Any, version: str) -> Raw:
    runs = ev.results.runs
    parts: list[Any] = []
    if runs.empty:
        parts.append(_para("The store holds no record of the commands that filled it."))
    for _, run in runs.iterrows():
        parts.append(_tag("h3", f"Run {run.get('run_id', '')}: {run.get('started', '')}"))
        parts.append(_tag("pre", run.get("command") or "(command not recorded)", cls="cmd"))
        if run.get("suite_text"):
            where = run.get("suite_path") or run.get("suite_name") or "suite"
            parts.append(
                _tag(
                    "details",
                    _join(
                        [_tag("summary", f"Suite text ({where})"), _tag("pre", run["suite_text"])]
                    ),
                )
            )
        env = _env(run.get("environment"))
        if env:
            parts.append(_table(["package or setting", "value"], [[k, v] for k, v in env.items()]))
    jobs = ev.results.jobs
    versions = ", ".join(sorted(set(jobs["lowdim_version"].dropna().astype(str))))
    seeds = ", ".join(f"{s:g}" for s in sorted(jobs["seed"].dropna().unique()))
    parts.append(
        _para(
            f"Jobs were run by lowdim {versions}; seeds {seeds}. This report was "
            f"built by lowdim {version} from store.sqlite alone; rebuild it with "
            f"`lowdim report {ev.results.out_dir}`. Job ids hash each job's full "
            "specification, so rerunning the suite skips finished jobs."
        )
    )
    return _section("reproduce", "Reproducibility", parts)


def _env(text: Any) -> dict:
    if not text or (isinstance(text, float) and math.isnan(text)):
        return {}
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        return {"environment": str(text)}
    if not isinstance(value, dict):
        return {"environment": str(value)}
    flat = {}
    for k, v in value.items():
        if isinstance(v, dict):
            flat.update({f"{k}.{kk}": str(vv) for kk, vv in v.items()})
        else:
            flat[k] = str(v)
    return flat


_CAUTION = (
    "An embedding is evidence to be checked, not a finding. A two-dimensional picture keeps "
    "some neighbourhoods and tears or merges others, and the scores above say how much on "
    "average, not where. Clusters, gaps, branches or gradients seen in a plot must be "
    "confirmed in the original data (distances, a held-out sample, a method with different "
    "assumptions, a domain check) before anyone acts on them. Scores on generated data with "
    "known truth do not transfer automatically to other data."
)

_CSS = """
:root{--ink:#11263f;--muted:#5a6675;--line:#d9dee5;--band:#f3f5f8;--warn:#fbf1d6;--accent:#833b0d}
*{box-sizing:border-box}
body{margin:0;font:15px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1d232b;
background:#fff}
header{background:var(--ink);color:#fff;padding:22px 32px 16px}
header h1{margin:0;font-size:24px;font-weight:600}
header p{margin:4px 0 0;color:#c9d4e3}
nav{position:sticky;top:0;background:var(--band);border-bottom:1px solid var(--line);
padding:8px 32px;z-index:2;font-size:14px}
nav a{color:var(--ink);margin-right:18px;text-decoration:none;border-bottom:2px solid transparent}
nav a:hover{border-color:var(--accent)}
main{max-width:1180px;margin:0 auto;padding:8px 32px 48px}
section{border-bottom:1px solid var(--line);padding:18px 0}
h2{color:var(--ink);font-size:20px;margin:8px 0 12px}
h3{color:var(--ink);font-size:16px;margin:18px 0 8px}
.facts{display:grid;grid-template-columns:repeat(auto-fill,minmax(150px,1fr));gap:8px;margin:0}
.facts div,.facts dt,.facts dd{margin:0}
.facts dt{font-size:12px;color:var(--muted);text-transform:uppercase;letter-spacing:.04em}
.facts dd{font-size:16px;font-weight:600;color:var(--ink);margin-bottom:8px}
.scroll{overflow-x:auto;margin:8px 0}
table{border-collapse:collapse;font-size:13px;min-width:40%}
th{background:var(--band);text-align:left;font-weight:600;border-bottom:2px solid var(--ink)}
th,td{padding:4px 10px;border-bottom:1px solid var(--line);vertical-align:top}
td:not(:first-child){font-variant-numeric:tabular-nums}
table.board td:not(:first-child),table.board th:not(:first-child){text-align:right}
table.fail td:last-child{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:12px}
figure{margin:14px 0}
figure img{max-width:100%;height:auto;border:1px solid var(--line)}
figcaption{font-size:13px;color:var(--muted);max-width:900px}
.warn{background:var(--warn);border-left:4px solid var(--accent);padding:8px 12px;margin:8px 0}
.caution{background:var(--band);border-left:4px solid var(--ink);padding:10px 14px}
.cards{display:grid;grid-template-columns:repeat(auto-fill,minmax(340px,1fr));gap:12px}
.card{border:1px solid var(--line);border-radius:6px;padding:4px 14px}
.card ul{padding-left:18px;margin:4px 0 10px}
.small{font-size:13px;color:var(--muted)}
details{margin:8px 0}
summary{cursor:pointer;font-weight:600;color:var(--ink)}
pre{background:var(--band);padding:8px 12px;overflow-x:auto;font-size:12px;white-space:pre-wrap}
@media print{nav{display:none}}
"""


def render_report(ev: Any, version: str) -> str:
    """The whole page as a string."""
    runs = ev.results.runs
    suites = sorted(set(runs["suite_name"].dropna())) if "suite_name" in runs else []
    title = "lowdim report" + (f": {', '.join(suites)}" if suites else "")
    sections = [
        ("run", "What was run"),
        ("leaderboard", "Leaderboard"),
        ("datasets", "Per dataset"),
        ("statistics", "Statistics"),
        ("methods", "Helps / fails"),
        ("reproduce", "Reproducibility"),
        ("caution", "Caution"),
    ]
    nav = _join([Raw(f'<a href="#{a}">{esc(t)}</a>') for a, t in sections])
    body = _join(
        [
            _overview(ev),
            _leaderboard(ev),
            _per_dataset(ev),
            _statistics(ev),
            _profiles(ev),
            _reproducibility(ev, version),
            _section("caution", "Caution", [_tag("div", _CAUTION, cls="caution")]),
        ]
    )
    folder = ev.results.out_dir.resolve().name
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{esc(title)}</title><style>{_CSS}</style></head><body>"
        f"<header><h1>{esc(title)}</h1><p>{esc(f'results folder {folder}')} · "
        f"{esc(f'selection criterion {ev.selection}')}</p></header>"
        f"<nav>{nav}</nav><main>{body}</main></body></html>\n"
    )
