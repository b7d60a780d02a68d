"""The report rebuilt from a store written through the store's API.

The store's numbers are invented (this checks rendering, escaping and files, not statistics;
those are checked against scipy and published values in tests/analysis/test_stats.py).
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
        "rnx.png",
        "cd.png",
        "bandwidth.png",
        "scaling.png",
        "breakdown.png",
    }
    assert expected <= figures
    assert not list(built.glob(".*tmp")), "temporary files left behind"
    # readable by a colleague or a web server: 0644 whatever the umask of the writer
    written = [built / name for name in OUTPUTS] + list((built / "figures").glob("*.png"))
    assert {p.stat().st_mode & 0o777 for p in written} == {0o644}


def test_stats_json_has_the_documented_format(built: Path) -> None:
    stats = json.loads((built / "stats.json").read_text())
    assert set(stats) >= {"winner", "order", "verdict", "selection", "blocks", "criteria"}
    assert stats["order"][0]["configuration"] == stats["winner"]
    assert stats["blocks"]["kind"] == "datasets" and stats["blocks"]["n"] == 7
    criteria = stats["criteria"]
    assert {"overall", "trustworthiness@10", "rnx_auc"} <= set(criteria)
    assert "bandwidth" not in criteria and "rnx@1" not in criteria  # not ranked criteria
    entry = criteria["rnx_auc"]
    assert entry["n_blocks"] == 7 and entry["n_configurations"] == 6
    assert entry["friedman"]["p_method"] in {"exact", "monte_carlo", "iman_davenport"}
    # mean ranks of k configurations sum to k(k+1)/2 over every block: an exact fact of ranking.
    assert sum(entry["mean_ranks"].values()) == pytest.approx(6 * 7 / 2)
    pairs = criteria["overall"]["pairwise"]
    assert pairs["against"] == stats["winner"] and len(pairs["pairs"]) == 5
    # knn_accuracy exists on one dataset only: no test over blocks is possible.
    assert criteria["knn_accuracy@5"]["n_blocks"] == 1


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
    assert "Tuned view" in md and "flatters" in md
    assert MARKUP not in md and "&lt;script&gt;" in md
    with open(built / "leaderboard.csv", newline="") as fh:
        board = list(csv.DictReader(fh))
    overall = [r for r in board if r["scope"] == "overall" and r["criterion"] == "rnx_auc"]
    assert len(overall) == 6
    winner = json.loads((built / "stats.json").read_text())["winner"]
    assert board[0]["configuration"] == winner and board[0]["place"] == "1"


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
    assert "flatters" in page  # the tuned view says its selection is optimistic
    assert "evidence to be checked, not a finding" in page
    assert "lowdim run suites/fixture.toml --jobs 2" in page
    # laplacian_eigenmaps loses 1.6 x noise of its quality: 0.52 of its best at noise 0.3.
    assert "Breaks down along noise on swiss_roll" in page


def test_the_report_opens_with_the_verdict_naming_the_winner_first(built: Path) -> None:
    page = (built / "report.html").read_text()
    winner = json.loads((built / "stats.json").read_text())["winner"]
    body = page[page.index("<main>") :]
    first = body.index("<section")
    assert body[first:].startswith('<section id="verdict">')
    verdict = re.search(r'<p class="verdict">(.*?)</p>', body).group(1)
    assert verdict.startswith(winner)
    # which test and which blocks the verdict rests on
    strength = re.search(r'<p class="strength">(.*?)</p>', body).group(1)
    assert "Friedman" in strength and "7 datasets as blocks" in strength
    # no other configuration is named before the winner on the page
    configs = ["pca", "laplacian_eigenmaps", "kernel_pca"]
    first_named = min((page.index(c), c) for c in configs if c in page)
    assert winner.startswith(first_named[1])


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
