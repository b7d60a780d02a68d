"""Where methods break: breakdown points along stress axes, and stability across seeds.

A *stress axis* is a numeric dataset parameter (noise, n, ambient dimension, ...) that varies
across the jobs of one dataset name in a run. Along it, each configuration's *breakdown point*
is the first axis value where its score falls below a set fraction of its own best on that
axis. *Seed stability* is the Procrustes disparity between a configuration's embeddings of
the same points under different seeds.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from lowdim.analysis.results import Results, _canonical, _json_dict

__all__ = ["DatasetCache", "breakdown_point", "stress_axes", "breakdown_table", "seed_stability"]


class DatasetCache:
    """Reloads datasets from their stored specs, once each, for colouring and seed checks.

    A dataset that cannot be reloaded (a user file moved since the run, a generator that is
    gone) gives None and its message is kept in ``errors``: a report must still be written.
    """

    def __init__(self, max_cells: int = 5_000_000) -> None:
        self.max_cells = max_cells
        self.errors: dict[str, str] = {}
        self._cache: dict[str, Any] = {}

    def get(self, params: dict, n_cells: float = 0.0) -> Any:
        key = _canonical(params)
        if key not in self._cache:
            self._cache[key] = None
            if n_cells > self.max_cells:
                self.errors[key] = f"not reloaded: {int(n_cells)} values is above the cap"
                return None
            try:
                from lowdim.datasets import load

                self._cache[key] = load(dict(params))
            except Exception as exc:  # any failure to reload only costs a colour or a check
                self.errors[key] = f"{type(exc).__name__}: {' '.join(str(exc).split())}"
        return self._cache[key]


def breakdown_point(
    axis_values: list, scores: list[float], higher: bool, fraction: float = 0.8
) -> Any:
    """The first axis value where the score falls below ``fraction`` of the curve's best.

    Quality relative to the best is score / best when higher is better and best / score when
    lower is better; a NaN score (the job failed there) counts as broken down. Returns None
    when the curve never falls below the fraction, and also when its best is not positive
    (the ratio then means nothing; :func:`breakdown_table` says so).
    """
    v = np.asarray(scores, dtype=float)
    finite = v[np.isfinite(v)]
    if finite.size == 0:
        return axis_values[0] if len(axis_values) else None
    best = finite.max() if higher else finite.min()
    if best <= 0:
        return None
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = v / best if higher else best / v
    for value, r in zip(axis_values, ratio, strict=True):
        if not np.isfinite(r) or r < fraction:
            return value
    return None


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def stress_axes(jobs: pd.DataFrame) -> list[tuple[str, str]]:
    """(dataset name, parameter) pairs where a numeric dataset parameter varies across jobs
    of the same dataset name; categorical parameters have no order to break down along."""
    axes = []
    for name, group in jobs.groupby("dataset", sort=True):
        specs = list(group["data_spec"])
        for key in sorted({k for d in specs for k in d}):
            values = [d.get(key) for d in specs]
            if all(_is_number(v) for v in values) and len(set(values)) > 1:
                axes.append((str(name), key))
    return axes


def breakdown_table(
    results: Results, table: pd.DataFrame, criteria: dict[str, bool], fraction: float = 0.8
) -> pd.DataFrame:
    """Breakdown points of every configuration along every stress axis, per criterion.

    Along an axis, the other varying parameters of the dataset are held fixed (``held``);
    the curve is the mean over seeds at each axis value, NaN where every job failed.
    Columns: ``dataset, axis, held, method, criterion, values, scores, best, breakdown, note``;
    ``breakdown`` is NaN where the curve holds up.
    """
    jobs = results.jobs
    rows = []
    for name, axis in stress_axes(jobs):
        sub = jobs[jobs["dataset"] == name]
        varying = {a for n, a in stress_axes(jobs) if n == name} - {axis}
        frame = pd.DataFrame(
            {
                "job_id": sub["job_id"],
                "method": sub["config"],
                "value": [d.get(axis) for d in sub["data_spec"]],
                "held": [
                    ", ".join(f"{k}={d.get(k)}" for k in sorted(varying)) for d in sub["data_spec"]
                ],
            }
        ).dropna(subset=["value"])
        scored = frame.merge(
            table[["job_id", "criterion", "value"]], on="job_id", suffixes=("", "_s")
        )
        for (held, method), cell in frame.groupby(["held", "method"], sort=True):
            grid = sorted(cell["value"].unique())
            if len(grid) < 2:
                continue  # the axis does not vary with these values held: no curve to read
            for key, higher in criteria.items():
                pts = scored[
                    (scored["held"] == held)
                    & (scored["method"] == method)
                    & (scored["criterion"] == key)
                ]
                if pts.empty:
                    continue
                means = pts.groupby("value")["value_s"].mean().reindex(grid)
                curve = [float(x) for x in means]
                finite = [x for x in curve if math.isfinite(x)]
                best = (max(finite) if higher else min(finite)) if finite else math.nan
                note = "" if best > 0 else "best score not positive: no breakdown point defined"
                rows.append(
                    {
                        "dataset": name,
                        "axis": axis,
                        "held": held,
                        "method": method,
                        "criterion": key,
                        "values": [float(g) for g in grid],
                        "scores": curve,
                        "best": best,
                        "breakdown": _nan_if_none(breakdown_point(grid, curve, higher, fraction)),
                        "note": note,
                    }
                )
    cols = [
        "dataset",
        "axis",
        "held",
        "method",
        "criterion",
        "values",
        "scores",
        "best",
        "breakdown",
        "note",
    ]
    return pd.DataFrame(rows, columns=cols)


def _nan_if_none(value: Any) -> float:
    return math.nan if value is None else float(value)


def seed_stability(results: Results, cache: DatasetCache | None = None) -> pd.DataFrame:
    """Spread of each configuration's embeddings across seeds after Procrustes alignment.

    The disparity of ``scipy.spatial.procrustes`` (both embeddings centred and scaled to unit
    norm, then the best rotation, reflection and scale: the residual sum of squares, in
    [0, 1]) against the first seed, averaged over the other seeds. Point-to-point alignment
    needs the same points, so a dataset drawn anew for each seed is not measured.

    Columns: ``dataset, method, n_seeds, disparity, note``.

    References
    ----------
    .. [1] J. C. Gower, "Generalized Procrustes analysis", Psychometrika 40, 33-51, 1975.
       https://doi.org/10.1007/BF02291478
    """
    from scipy.spatial import procrustes

    cache = cache or DatasetCache()
    jobs = results.jobs[results.jobs["status"] == "ok"].sort_values("seed")
    same_data: dict[str, tuple[bool, str]] = {}
    rows = []
    for (data, method), group in jobs.groupby(["data", "config"], sort=True):
        paths = [results.embedding_path(j) for j in group["job_id"]]
        present = [p for p in paths if p.is_file()]
        row = {"dataset": data, "method": method, "n_seeds": len(present), "disparity": math.nan}
        if len(present) < 2:
            rows.append({**row, "note": "fewer than two seeds with an embedding"})
            continue
        if data not in same_data:
            same_data[data] = _same_points(jobs[jobs["data"] == data], cache)
        same, why = same_data[data]
        if not same:
            rows.append({**row, "note": why})
            continue
        first = np.load(present[0])
        values = []
        for path in present[1:]:
            other = np.load(path)
            if other.shape != first.shape:
                continue
            try:
                values.append(procrustes(first, other)[2])
            except ValueError:  # a constant embedding has no shape to align
                continue
        note = "" if values else "embeddings could not be aligned (constant or mismatched)"
        rows.append(
            {**row, "disparity": float(np.mean(values)) if values else math.nan, "note": note}
        )
    return pd.DataFrame(rows, columns=["dataset", "method", "n_seeds", "disparity", "note"])


def _same_points(jobs: pd.DataFrame, cache: DatasetCache) -> tuple[bool, str]:
    raw = jobs.drop_duplicates("seed")
    specs = [_json_dict(p) for p in raw["dataset_params"]]
    if len({_canonical(s) for s in specs}) == 1:
        return True, ""
    arrays = []
    for spec, n, d in zip(specs, raw["n_samples"], raw["n_features"], strict=True):
        ds = cache.get(spec, float(n) * float(d) if pd.notna(n) and pd.notna(d) else 0.0)
        if ds is None:
            return False, "the data could not be reloaded to check that seeds share their points"
        arrays.append(np.asarray(ds.X))
    if all(a.shape == arrays[0].shape and np.array_equal(a, arrays[0]) for a in arrays[1:]):
        return True, ""
    return False, "the data are drawn anew for each seed, so embeddings have no common points"
