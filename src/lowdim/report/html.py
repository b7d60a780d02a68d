"""report.html: one self-contained page rendered from a Jinja2 template.

The page gets plain data (strings, lists, dicts of already-formatted text) built here from the
:class:`Analysis` and the tables of :mod:`lowdim.report.views`; the template
(``templates/report.html.j2``) holds loops and conditionals only, and autoescaping escapes
every string, so labels and messages from the user or the store cannot inject markup. The
stylesheet (``templates/report.css``) and the figures (data URIs) are inlined at build time.
"""

from __future__ import annotations

import base64
import json
import math
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

import pandas as pd
from jinja2 import Environment, PackageLoader, select_autoescape

from lowdim.analysis.engine import Analysis
from lowdim.analysis.ranking import natural_key
from lowdim.report import format as fmt
from lowdim.report.narrative import (
    blocks_phrase,
    candidates_reading,
    confirmation_reading,
    consistency,
    effect_criterion,
    method_profiles,
    statistics_reading,
    strength,
    test_form,
    verdict,
)
from lowdim.report.views import (
    Table,
    criterion_title,
    dataset_tables,
    overall_table,
    tuned_tables,
)
from lowdim.run.settings import OVERALL

__all__ = ["CAUTION", "render_report"]

CAUTION = (
    "An embedding is evidence to be checked, not a finding. A two-dimensional picture keeps "
    "some neighbourhoods and tears or merges others, and the scores here say how much on "
    "average, not where. Clusters, gaps, branches or gradients seen in a plot must be "
    "confirmed in the original data (distances, a held-out sample, a method with different "
    "assumptions, a domain check) before anyone acts on them. Scores on generated data with "
    "known truth do not transfer automatically to other data."
)


@lru_cache(maxsize=1)
def _environment() -> Environment:
    return Environment(
        loader=PackageLoader("lowdim", "report/templates"),
        autoescape=select_autoescape(["html", "j2"], default_for_string=True, default=True),
        trim_blocks=True,
        lstrip_blocks=True,
    )


def _stylesheet() -> str:
    return resources.files("lowdim.report").joinpath("templates/report.css").read_text("utf-8")


def _figure(figures: dict[str, Path], captions: dict[str, str], name: str, alt: str) -> dict:
    path = figures.get(name)
    if path is None or not Path(path).is_file():
        return {}
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    return {"src": f"data:image/png;base64,{data}", "caption": captions.get(name, ""), "alt": alt}


def _table(table: Table) -> dict:
    return {"title": table.title, "header": table.header, "rows": table.rows, "note": table.note}


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


def _int(value: Any) -> str:
    return "–" if value is None or pd.isna(value) else f"{int(value)}"


def _params(spec: dict) -> str:
    return ", ".join(f"{k}={v}" for k, v in spec.items() if v is not None) or "defaults"


def _overview(an: Analysis) -> dict:
    jobs, runs = an.results.jobs, an.results.runs
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
    if len(an.results.damaged):
        facts.append(("missing or damaged files", _damaged(an.results.damaged)))
    data = jobs.drop_duplicates("data")
    data = data.iloc[sorted(range(len(data)), key=lambda i: natural_key(data["data"].iloc[i]))]
    data_rows = [
        [
            r["data"],
            r["dataset"],
            _int(r["n_samples"]),
            _int(r["n_features"]),
            _params(r["data_spec"]),
        ]
        for _, r in data.iterrows()
    ]
    conf = jobs.drop_duplicates("config").set_index("config")
    conf_rows = [
        [m, conf.at[m, "family"], _params(conf.at[m, "config_spec"])]
        for m in an.order
        if m in conf.index
    ]
    criteria = [
        f"{criterion_title(c.key)} ({'higher' if c.higher_is_better else 'lower'} is better; "
        f"{c.source})"
        for c in an.settings.criteria
        if c.key in set(an.summary["criterion"])
    ]
    return {
        "facts": facts,
        "datasets": data_rows,
        "configs": conf_rows,
        "criteria": criteria,
        "n_jobs": len(jobs),
    }


def _damaged(damaged: pd.DataFrame) -> str:
    """Which finished jobs lost which file, and what to do."""
    jobs = damaged["job_id"].nunique()
    files = "; ".join(
        f"{r.method} on {r.dataset} (seed {r.seed:g}): {r.file} {r.problem}"
        for r in damaged.itertuples()
    )
    their, them = ("their", "them") if jobs > 1 else ("its", "it")
    return (
        f"{jobs} finished job{'s' if jobs > 1 else ''} ({files}); {their} scores stand, what "
        f"needs the file is left out; run the suite again into this folder to recompute {them}"
    )


def _statistics(an: Analysis) -> dict:
    rows = []
    for key in an.criteria:
        t = an.tests[key]
        f = t.friedman
        rows.append(
            [
                criterion_title(key),
                str(t.n_blocks),
                str(t.n_configurations),
                "–" if f is None else f"{f.statistic:.2f}",
                "–" if f is None else fmt.p_value(f.p_value),
                test_form(t),
                "–" if t.critical_difference is None else f"{t.critical_difference:.2f}",
                t.mean_ranks.index[0] if len(t.mean_ranks) else "–",
            ]
        )
    keys = [an.selection] + [k for k in an.headline if k != an.selection]
    readings = [" ".join(statistics_reading(an, k)) for k in keys if k in an.tests]
    sel = an.tests.get(an.selection)
    pairs = []
    if sel is not None:
        for p in sel.pairs:
            pairs.append(
                [
                    p.other,
                    str(p.n_blocks),
                    fmt.p_value(p.p_value),
                    fmt.p_value(p.p_holm),
                    p.method,
                    f"{p.median_difference:.2f} ranks"
                    if an.selection == OVERALL
                    else fmt.number(p.median_difference),
                ]
            )
    return {
        "blocks": (
            f"The blocks of every test are the {blocks_phrase(an)}: "
            + ", ".join(an.blocks[:12])
            + (f" and {len(an.blocks) - 12} more" if len(an.blocks) > 12 else "")
            + ". Seeds within a block are averaged first; criteria are never pooled as blocks."
        ),
        "readings": readings,
        "rows": rows,
        "pairs": pairs,
        "pairs_title": f"{an.winner} against each other configuration on "
        f"{criterion_title(an.selection)}",
    }


def _failures(an: Analysis) -> list[list[str]]:
    return [
        [r["dataset"], r["method"], f"{r['seed']:g}", r["status"], r["error"] or ""]
        for _, r in an.failures.iterrows()
    ]


def _stability(an: Analysis) -> dict:
    measured = an.stability[an.stability["disparity"].notna()]
    rows = [
        [r["dataset"], r["method"], str(r["n_seeds"]), fmt.number(r["disparity"])]
        for _, r in measured.iterrows()
    ]
    notes = sorted(set(an.stability["note"]) - {""}) if not an.stability.empty else []
    return {"rows": rows, "notes": notes}


def _env(text: Any) -> list[list[str]]:
    if not text or (isinstance(text, float) and math.isnan(text)):
        return []
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        return [["environment", str(text)]]
    if not isinstance(value, dict):
        return [["environment", str(value)]]
    flat = []
    for k, v in value.items():
        if isinstance(v, dict):
            flat += [[f"{k}.{kk}", str(vv)] for kk, vv in v.items()]
        else:
            flat.append([k, str(v)])
    return flat


def _reproduce(an: Analysis, version: str) -> dict:
    runs = []
    for _, run in an.results.runs.iterrows():
        runs.append(
            {
                "title": f"Run {run.get('run_id', '')}: {run.get('started', '')}",
                "command": run.get("command") or "(command not recorded)",
                "suite_where": run.get("suite_path") or run.get("suite_name") or "suite",
                "suite_text": run.get("suite_text") or "",
                "environment": _env(run.get("environment")),
            }
        )
    jobs = an.results.jobs
    versions = ", ".join(sorted(set(jobs["lowdim_version"].dropna().astype(str))))
    seeds = ", ".join(f"{s:g}" for s in sorted(jobs["seed"].dropna().unique()))
    return {
        "runs": runs,
        "text": f"Jobs were run by lowdim {versions}; seeds {seeds}. This report was built by "
        f"lowdim {version} from store.sqlite alone (its settings record included); rebuild it "
        f"with `lowdim report {an.results.out_dir}`. Job ids hash each job's full "
        "specification, so rerunning the suite skips finished jobs.",
    }


def render_report(
    an: Analysis, figures: dict[str, Path], captions: dict[str, str], version: str
) -> str:
    """The whole page as a string."""
    runs = an.results.runs
    suites = sorted(set(runs["suite_name"].dropna())) if "suite_name" in runs else []
    title = "lowdim report" + (f": {', '.join(suites)}" if suites else "")
    fig = {
        name: _figure(figures, captions, name, alt)
        for name, alt in (
            ("gallery", "embeddings of the leading configurations"),
            ("cd", "critical difference diagram"),
            ("heatmap", "gap to the best configuration per dataset"),
            ("rnx", "R_NX curves"),
            ("breakdown", "breakdown curves"),
            ("bandwidth", "bandwidth sensitivity"),
            ("scaling", "scaling curves"),
            ("quality", "per-point quality of the leading configurations"),
            ("degenerate", "degenerate embeddings"),
        )
    }
    fits = []
    if not an.scaling_fits.empty:
        wide = an.scaling_fits.pivot_table(index="method", columns="quantity", values="slope")
        fits = [
            [
                m,
                fmt.number(r.get("fit_seconds", math.nan), 2),
                fmt.number(r.get("peak_mb", math.nan), 2),
            ]
            for m, r in wide.iterrows()
        ]
    view = {
        "title": title,
        "folder": an.results.out_dir.resolve().name,
        "verdict": verdict(an),
        "strength": strength(an),
        "caution": CAUTION,
        "figures": fig,
        "board": _table(overall_table(an, values=an.settings.blocks == "resamples")),
        "readings": [
            s for s in (consistency(an), *confirmation_reading(an), candidates_reading(an)) if s
        ],
        "findings": list(an.settings.context.get("findings") or []),
        "datasets": [_table(t) for t in dataset_tables(an)],
        "tuned": [_table(t) for t in tuned_tables(an)],
        "tuned_title": criterion_title(an.selection),
        "statistics": _statistics(an),
        "effect_title": criterion_title(effect_criterion(an)),
        "profiles": method_profiles(an),
        "fits": fits,
        "published": [
            [
                r.dataset,
                r.method,
                criterion_title(r.criterion),
                fmt.number(r.published),
                fmt.number(r.measured) if math.isfinite(r.measured) else "not measured",
                fmt.number(r.difference) if math.isfinite(r.difference) else "–",
                f"{r.source}, {r.table}" + (f" ({r.note})" if r.note else ""),
            ]
            for r in an.published.itertuples()
        ],
        "unprinted": list(an.settings.unprinted),
        "diagnoses": [
            [r.method, r.dataset, f"{r.seed:g}", r.kind.replace("_", " "), r.explanation]
            for r in an.diagnoses.drop_duplicates(["method", "dataset", "kind"]).itertuples()
        ],
        "stability": _stability(an),
        "failures": _failures(an),
        "overview": _overview(an),
        "reproduce": _reproduce(an, version),
        "css": _stylesheet(),
    }
    return _environment().get_template("report.html.j2").render(**view)
