"""The report rebuilt from a store written in the schema of DEVELOPERS.md.

The store's numbers are invented (this checks rendering, escaping and files, not statistics;
those are checked against published values in test_scoring.py).
"""

from __future__ import annotations

import csv
import json
import os
import re
import shutil
import sqlite3
import subprocess
from pathlib import Path

import pytest

from lowdim.errors import InputError
from lowdim.report import build_report

MARKUP = "<script>alert(1)</script>"

OUTPUTS = [
    "scores.csv",
    "stats.json",
    "leaderboard.csv",
    "leaderboard.md",
    "leaderboard.tex",
    "report.html",
]


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory, write_store) -> Path:
    folder = write_store(tmp_path_factory.mktemp("run") / "fixture", iris_label=MARKUP)
    build_report(folder)
    return folder


def test_every_output_is_written(built: Path) -> None:
    for name in OUTPUTS:
        assert (built / name).stat().st_size > 0, name
    figures = {p.name for p in (built / "figures").glob("*.png")}
    expected = {
        "gallery.png",
        "heatmap.png",
        "rnx_curves.png",
        "critical_difference.png",
        "bandwidth.png",
        "scaling.png",
        "breakdown.png",
    }
    assert expected <= figures
    assert not list(built.glob(".*tmp")), "temporary files left behind"


def test_stats_json_has_the_documented_format(built: Path) -> None:
    stats = json.loads((built / "stats.json").read_text())
    keys = {
        "friedman_chi2",
        "p_value",
        "iman_davenport_f",
        "iman_davenport_p",
        "critical_difference",
        "mean_ranks",
        "n_datasets",
        "n_methods",
    }
    assert "trustworthiness@10" in stats and "rnx_auc" in stats
    assert "bandwidth" not in stats  # not a registered criterion
    for entry in stats.values():
        assert set(entry) == keys
    entry = stats["rnx_auc"]
    assert entry["n_datasets"] == 7 and entry["n_methods"] == 6
    # mean ranks of k methods sum to k(k+1)/2 over every dataset: an exact fact of ranking.
    assert sum(entry["mean_ranks"].values()) == pytest.approx(6 * 7 / 2)
    # knn_accuracy exists on one dataset only: no test is possible.
    assert stats["knn_accuracy@5"]["p_value"] is None


def test_scores_csv_holds_the_stored_values_exactly(built: Path) -> None:
    con = sqlite3.connect(built / "store.sqlite")
    stored = {(j, m, k): v for j, m, k, v in con.execute("SELECT * FROM scores")}
    con.close()
    with open(built / "scores.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["job_id", "dataset", "method", "seed", "metric", "k", "value"]
    assert len(rows) == len(stored)
    for r in rows:  # repr of a float64 round-trips exactly (Python's float repr guarantee)
        assert float(r["value"]) == stored[(r["job_id"], r["metric"], int(r["k"]))]


def test_leaderboard_files(built: Path) -> None:
    tex = (built / "leaderboard.tex").read_text()
    assert "\\toprule" in tex and "\\midrule" in tex and "\\bottomrule" in tex
    assert "\\textbf{" in tex
    assert MARKUP not in tex and "\\textless{}script\\textgreater{}" in tex
    md = (built / "leaderboard.md").read_text()
    assert "Tuned view" in md and "optimistic" in md
    with open(built / "leaderboard.csv", newline="") as fh:
        board = list(csv.DictReader(fh))
    overall = [r for r in board if r["scope"] == "overall" and r["criterion"] == "rnx_auc"]
    assert len(overall) == 6


def test_markup_in_labels_and_messages_is_escaped(built: Path) -> None:
    page = (built / "report.html").read_text()
    assert MARKUP not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "<b>after</b>" not in page and "&lt;b&gt;after&lt;/b&gt;" in page
    assert "&amp;lt;" not in page  # escaped once, not twice


def test_report_is_self_contained_and_says_what_it_must(built: Path) -> None:
    page = (built / "report.html").read_text()
    assert "<script" not in page
    assert not re.search(r"""(src|href)=["']?(https?:|//|file:)""", page)
    assert page.count('src="data:image/png;base64,') >= 6
    assert "flattered" in page  # the tuned view's selection criterion is also reported
    assert "evidence to be checked, not a finding" in page
    assert "lowdim run suites/fixture.toml --jobs 2" in page
    # laplacian_eigenmaps loses 1.6 x noise of its quality: 0.52 of its best at noise 0.3.
    assert "Breaks down along noise on swiss_roll" in page


def test_report_renders_in_headless_chromium(built: Path, tmp_path: Path) -> None:
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None and os.path.exists("/usr/bin/chromium"):
        browser = "/usr/bin/chromium"
    if browser is None:
        pytest.skip("chromium is not installed")
    shot = tmp_path / "report.png"
    cmd = [
        browser,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={tmp_path / 'profile'}",
        "--enable-logging=stderr",
        "--v=0",
        f"--screenshot={shot}",
        "--window-size=1280,2000",
        (built / "report.html").resolve().as_uri(),
    ]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=90)
    assert shot.is_file(), proc.stderr[-2000:]
    assert shot.stat().st_size > 20_000
    console = [
        line
        for line in proc.stderr.splitlines()
        if "Uncaught" in line or ("CONSOLE" in line and "rror" in line)
    ]
    assert not console, console


def test_folder_without_store_is_an_input_error(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no results store"):
        build_report(tmp_path)
