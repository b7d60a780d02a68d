"""Tidy data behind the report's curves: R_NX(K), bandwidth sweeps, scaling, the gallery."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

from lowdim.analysis.results import Results, canonical

__all__ = [
    "rnx_curves",
    "bandwidth_curves",
    "scaling_table",
    "scaling_stops",
    "loglog_slope",
    "gallery_panels",
    "quality_panels",
    "degenerate_panels",
]


def rnx_curves(table: pd.DataFrame) -> pd.DataFrame:
    """Mean R_NX(K) over seeds: ``dataset, method, k, mean``."""
    part = table[(table["metric"] == "rnx") & (table["k"] > 0)]
    return (
        part.groupby(["dataset", "method", "k"], sort=True)["value"]
        .mean()
        .rename("mean")
        .reset_index()
    )


def bandwidth_curves(results: Results, table: pd.DataFrame, criterion: str) -> pd.DataFrame:
    """Criterion against bandwidth for methods whose configurations differ only in it.

    Columns ``family, held, dataset, method, bandwidth, rule, picked, score``: ``bandwidth`` is
    the number (NaN for a rule), ``rule`` the rule's text (empty for a number), ``picked`` the
    sigma a rule chose when the runner stored it as the score ``bandwidth`` (k = 0), NaN if not.
    """
    cols = ["family", "held", "dataset", "method", "bandwidth", "rule", "picked", "score"]
    jobs = results.jobs.drop_duplicates("config")
    swept = []
    for family, group in jobs.groupby("family", sort=True):
        specs = [
            (c, s)
            for c, s in zip(group["config"], group["config_spec"], strict=True)
            if "bandwidth" in s
        ]
        held_of = {
            c: canonical({k: v for k, v in s.items() if k != "bandwidth"}) for c, s in specs
        }
        for held in sorted(set(held_of.values())):
            members = [(c, s["bandwidth"]) for c, s in specs if held_of[c] == held]
            if len({json.dumps(b, default=str) for _, b in members}) >= 2:
                swept.extend((family, _held_text(held), c, b) for c, b in members)
    if not swept:
        return pd.DataFrame(columns=cols)
    means = table.groupby(["dataset", "method", "criterion"])["value"].mean()
    rows = []
    for family, held, config, bw in swept:
        for dataset in sorted(table.loc[table["method"] == config, "dataset"].unique()):
            score = means.get((dataset, config, criterion), math.nan)
            picked = means.get((dataset, config, "bandwidth"), math.nan)
            numeric = isinstance(bw, int | float) and not isinstance(bw, bool)
            rows.append(
                {
                    "family": family,
                    "held": held,
                    "dataset": dataset,
                    "method": config,
                    "bandwidth": float(bw) if numeric else math.nan,
                    "rule": "" if numeric else str(bw),
                    "picked": float(picked),
                    "score": float(score),
                }
            )
    return pd.DataFrame(rows, columns=cols)


def _held_text(canonical: str) -> str:
    shown = {k: v for k, v in json.loads(canonical).items() if k not in ("name", "import")}
    return ", ".join(f"{k}={v}" for k, v in shown.items())


def loglog_slope(n: np.ndarray, y: np.ndarray) -> float:
    """Least-squares slope of log y against log n over positive pairs (NaN if < 2 distinct n)."""
    n, y = np.asarray(n, dtype=float), np.asarray(y, dtype=float)
    keep = (n > 0) & (y > 0) & np.isfinite(n) & np.isfinite(y)
    if np.unique(n[keep]).size < 2:
        return math.nan
    return float(np.polyfit(np.log(n[keep]), np.log(y[keep]), 1)[0])


def scaling_table(results: Results) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Fit time and peak memory against n for dataset names whose n varies in the run.

    Returns ``(points, fits)``: points ``method, n_samples, fit_seconds, peak_mb`` (means
    over seeds and datasets of equal n), fits ``method, quantity, slope, n_points``.
    """
    ok = results.jobs[results.jobs["status"] == "ok"].dropna(subset=["n_samples"])
    varying = ok.groupby("dataset")["n_samples"].nunique()
    ok = ok[ok["dataset"].isin(varying[varying >= 2].index)]
    if ok.empty:
        empty = pd.DataFrame(columns=["method", "n_samples", "fit_seconds", "peak_mb"])
        return empty, pd.DataFrame(columns=["method", "quantity", "slope", "n_points"])
    points = (
        ok.groupby(["config", "n_samples"])[["fit_seconds", "peak_mb"]]
        .mean()
        .reset_index()
        .rename(columns={"config": "method"})
    )
    fits = []
    for method, g in points.groupby("method", sort=True):
        for quantity in ("fit_seconds", "peak_mb"):
            slope = loglog_slope(g["n_samples"].to_numpy(), g[quantity].to_numpy())
            fits.append(
                {
                    "method": method,
                    "quantity": quantity,
                    "slope": slope,
                    "n_points": int(g["n_samples"].nunique()),
                }
            )
    return points, pd.DataFrame(fits)


def scaling_stops(results: Results) -> pd.DataFrame:
    """Where each configuration stopped along n: the smallest n at which a job hit its time or
    memory limit, for dataset names whose n varies. Columns ``method, n_samples, status``."""
    jobs = results.jobs.dropna(subset=["n_samples"])
    varying = jobs.groupby("dataset")["n_samples"].nunique()
    jobs = jobs[jobs["dataset"].isin(varying[varying >= 2].index)]
    stopped = jobs[jobs["status"].isin(["timeout", "memory"])]
    if stopped.empty:
        return pd.DataFrame(columns=["method", "n_samples", "status"])
    first = stopped.sort_values("n_samples").drop_duplicates("config")
    first = first[["config", "n_samples", "status"]].rename(columns={"config": "method"})
    return first.reset_index(drop=True)


def gallery_panels(
    results: Results, leaders: list[str], max_datasets: int = 6
) -> tuple[list[dict], list[str]]:
    """The first seed's embeddings of ``leaders`` on up to ``max_datasets`` datasets.

    Each panel is coloured by what the runner stored for the job's data (the first intrinsic
    coordinate, the labels, or the first principal component); nothing is reloaded. Returns
    the panels (``dataset, method, Y, colour, kind``) and notes for the caption.
    """
    ok = results.jobs[(results.jobs["status"] == "ok") & results.jobs["config"].isin(leaders)]
    if ok.empty:
        return [], []
    seed = ok["seed"].min()
    first = ok[ok["seed"] == seed]
    datasets = list(dict.fromkeys(first["data"]))[:max_datasets]
    panels, notes = [], []
    for data in datasets:
        rows = first[first["data"] == data].set_index("config")
        for method in leaders:
            if method not in rows.index:
                continue
            job = rows.loc[method]
            Y = results.embedding(job["job_id"])
            if Y is None:
                notes.append(f"{method} on {data}: the embedding file is missing or damaged")
                continue
            stored = results.colours(job)
            colour, kind = (None, "order") if stored is None else (stored[1], stored[0])
            if colour is not None and len(colour) != len(Y):
                colour, kind = None, "order"
            if kind == "order":
                notes.append(f"{data}: coloured by row order (no stored colours)")
            panels.append(
                {"dataset": data, "method": method, "Y": Y, "colour": colour, "kind": kind}
            )
    return panels, list(dict.fromkeys(notes))


def quality_panels(
    results: Results, leaders: list[str], key: str, max_datasets: int = 3
) -> tuple[list[dict], str]:
    """The first seed's embeddings of ``leaders`` coloured by each point's quality ``key``
    (``"qnx@10"``, a per-point criterion the runner stored in ``quality/<job_id>.npz``).

    Points outside a sampled set of query rows get NaN (drawn grey). Returns the panels
    (``dataset, method, Y, colour, kind="quality"``) and the key found (the first stored one
    when ``key`` is absent).
    """
    ok = results.jobs[(results.jobs["status"] == "ok") & results.jobs["config"].isin(leaders)]
    if ok.empty:
        return [], key
    first = ok[ok["seed"] == ok["seed"].min()]
    panels = []
    for data in list(dict.fromkeys(first["data"]))[:max_datasets]:
        rows = first[first["data"] == data].set_index("config")
        for method in leaders:
            if method not in rows.index:
                continue
            job_id = rows.loc[method, "job_id"]
            stored = results.quality(job_id)
            Y = results.embedding(job_id)
            if stored is None or Y is None:
                continue
            names = [n for n in stored if n != "rows"]
            if not names:
                continue
            if key not in names:
                key = next((n for n in names if n.startswith("qnx@")), names[0])
            colour = np.full(len(Y), np.nan)
            colour[stored["rows"]] = stored[key]
            panels.append(
                {"dataset": data, "method": method, "Y": Y, "colour": colour, "kind": "quality"}
            )
    return panels, key


def degenerate_panels(results: Results, diagnoses: pd.DataFrame, limit: int = 6) -> list[dict]:
    """Up to ``limit`` embeddings in which the runner found a degeneracy, one per
    (configuration, dataset, kind), first seed, coloured as in the gallery."""
    if diagnoses.empty:
        return []
    picked = diagnoses.sort_values("seed").drop_duplicates(["method", "dataset", "kind"])
    jobs = results.jobs.set_index("job_id")
    panels = []
    for row in picked.head(limit).itertuples():
        Y = results.embedding(row.job_id)
        if Y is None:
            continue
        stored = results.colours(jobs.loc[row.job_id])
        colour, kind = (None, "order") if stored is None else (stored[1], stored[0])
        panels.append(
            {
                "dataset": row.dataset,
                "method": row.method,
                "finding": row.kind.replace("_", " "),
                "Y": Y,
                "colour": colour if colour is not None and len(colour) == len(Y) else None,
                "kind": kind,
            }
        )
    return panels
