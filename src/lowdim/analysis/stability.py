"""Stability across seeds: how much a configuration's embedding of the same points moves.

Point-to-point alignment needs the same points, so embeddings are compared only where the
jobs' stored data fingerprints agree (the runner hashes each job's data matrix); a dataset
drawn anew for each seed is not measured, and the table says so.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from lowdim.analysis.results import Results

__all__ = ["seed_stability"]

COLUMNS = ["dataset", "method", "n_seeds", "disparity", "note"]


def seed_stability(results: Results) -> pd.DataFrame:
    """Spread of each configuration's embeddings across seeds after Procrustes alignment.

    The disparity of ``scipy.spatial.procrustes`` (both embeddings centred and scaled to unit
    norm, then the best rotation, reflection and scale: the residual sum of squares, in
    [0, 1]) against the first seed, averaged over the other seeds.

    Columns: ``dataset, method, n_seeds, disparity, note``.

    References
    ----------
    .. [1] J. C. Gower, "Generalized Procrustes analysis", Psychometrika 40, 33-51, 1975.
       https://doi.org/10.1007/BF02291478
    """
    from scipy.spatial import procrustes

    jobs = results.jobs[results.jobs["status"] == "ok"].sort_values("seed")
    rows = []
    for (data, method), group in jobs.groupby(["data", "config"], sort=True):
        loaded = [
            (results.embedding(j), fp)
            for j, fp in zip(group["job_id"], group["data_fingerprint"], strict=True)
        ]
        present = [(Y, fp) for Y, fp in loaded if Y is not None]
        row = {"dataset": data, "method": method, "n_seeds": len(present), "disparity": math.nan}
        if len(present) < 2:
            rows.append({**row, "note": "fewer than two seeds with an embedding"})
            continue
        prints = {fp for _, fp in present}
        if None in prints or any(isinstance(fp, float) for fp in prints):
            rows.append({**row, "note": "the store has no data fingerprints for these jobs"})
            continue
        if len(prints) > 1:
            rows.append(
                {
                    **row,
                    "note": "the data are drawn anew for each seed, so embeddings have no "
                    "common points",
                }
            )
            continue
        first = present[0][0]
        values = []
        for other, _ in present[1:]:
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
    return pd.DataFrame(rows, columns=COLUMNS)
