"""Where methods break: breakdown points along stress axes.

A *stress axis* is a numeric dataset parameter (noise, n, ambient dimension, ...) that varies
across the jobs of one dataset name in a run. Along it, each configuration's *breakdown point*
is the first axis value where its score falls below a set fraction of its own best on that
axis.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from lowdim.analysis.results import Results

__all__ = ["BREAKDOWN_FRACTION", "breakdown_point", "stress_axes", "breakdown_table"]

BREAKDOWN_FRACTION = 0.8
"""A method breaks down along a stress axis where its score falls below this share of its best."""


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
