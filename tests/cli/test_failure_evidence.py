"""Where and why a method fails, end to end: the quick suite's own failures named in the report.

On the quick suite's 800-point swiss roll Laplacian eigenmaps draws a U: its second coordinate
is a harmonic of the first (Dsilva, Talmon, Coifman & Kevrekidis, ACHA 44, 2018; the
eigenfunctions of a long strip, REFERENCES.md). On 600 two-moons points the 10-neighbour graph
splits and a moon collapses to a point (a disconnected graph's eigenvalue 0 has indicator
vectors, von Luxburg 2007).
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from lowdim.cli import main

SUITE = """
[suite]
name = "failures"
seeds = [0]
neighbors = [5, 10, 30]
metrics = ["trustworthiness", "continuity", "rnx_auc"]

[[datasets]]
name = "swiss_roll"
n = 800
noise = 0.05

[[datasets]]
name = "two_moons"
n = 600
noise = 0.05

[[methods]]
name = "pca"

[[methods]]
name = "laplacian_eigenmaps"
n_neighbors = 10
"""


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("failures")
    suite = root / "failures.toml"
    suite.write_text(SUITE)
    assert main(["run", str(suite), "--out", str(root / "out"), "--jobs", "1", "--quiet"]) == 0
    return root / "out"


def test_the_report_names_the_harmonic_and_the_collapsed_moon(folder: Path) -> None:
    with sqlite3.connect(folder / "store.sqlite") as con:
        rows = con.execute(
            "SELECT dataset, method, diagnoses FROM jobs WHERE method = 'laplacian_eigenmaps'"
        ).fetchall()
    found = {dataset: {d["kind"] for d in json.loads(text)} for dataset, _, text in rows}
    assert "harmonic" in found["swiss_roll"]
    assert "collapsed_component" in found["two_moons"]
    page = (folder / "report.html").read_text()
    assert "Degenerate embeddings" in page
    assert "Harmonic in" in page and "Collapsed component in" in page
    assert (folder / "figures" / "degenerate.png").is_file()
    assert (folder / "figures" / "quality.png").is_file()


def test_stored_per_point_quality_averages_to_the_stored_criteria(folder: Path) -> None:
    # Lee & Verleysen 2009; Mokbel et al., Neurocomputing 112, 2013 (REFERENCES.md): the mean
    # of the per-point terms is the global criterion, exactly.
    with sqlite3.connect(folder / "store.sqlite") as con:
        jobs = con.execute("SELECT job_id FROM jobs WHERE status = 'ok'").fetchall()
        for (job_id,) in jobs:
            stored = np.load(folder / "quality" / f"{job_id}.npz")
            for key in ("trustworthiness@10", "continuity@10"):
                metric, k = key.split("@")
                (value,) = con.execute(
                    "SELECT value FROM scores WHERE job_id = ? AND metric = ? AND k = ?",
                    (job_id, metric, int(k)),
                ).fetchone()
                assert stored[key].mean() == pytest.approx(value, abs=1e-12)
            assert stored["rows"].size == 800 or stored["rows"].size == 600
