"""One verdict: every output of a run or a comparison names the same winner first, at the same K.

PCA and classical MDS compute the same embedding on Euclidean data (Torgerson 1952; Gower
1966: B = Xc Xc^T, REFERENCES.md), so their scores tie; the one tie-break rule names PCA, the
simpler method, first, and every output must agree.
"""

from __future__ import annotations

import csv
import json
import re
from pathlib import Path

import numpy as np
import pandas as pd

from lowdim.cli import main

SUITE = """
[suite]
name = "verdict"
seeds = [0]
neighbors = [5, 10, 30]
metrics = ["trustworthiness", "continuity", "rnx_auc", "distance_spearman"]

[[datasets]]
name = "swiss_roll"
n = 150

[[datasets]]
name = "s_curve"
n = 150

[[methods]]
name = "classical_mds"

[[methods]]
name = "pca"

[[methods]]
name = "kernel_pca"
kernel = "rbf"
bandwidth = 0.02
"""


def first_named(folder: Path) -> dict[str, str]:
    """The configuration each output names first."""
    stats = json.loads((folder / "stats.json").read_text())
    with open(folder / "leaderboard.csv", newline="") as fh:
        board = next(csv.DictReader(fh))
    md = (folder / "leaderboard.md").read_text().splitlines()
    header = md.index(next(line for line in md if line.startswith("| place")))
    md_first = md[header + 2].split("|")[2].strip().strip("*")
    html = (folder / "report.html").read_text()
    verdict = re.search(r'<p class="verdict">(.*?) ranks first', html).group(1)
    return {
        "stats.json": stats["winner"],
        "stats.json order": stats["order"][0]["configuration"],
        "leaderboard.csv": board["configuration"],
        "leaderboard.md": md_first,
        "report.html": verdict,
    }


def test_a_run_names_one_winner_everywhere_with_a_tie(tmp_path: Path, capsys) -> None:
    suite = tmp_path / "verdict.toml"
    suite.write_text(SUITE)
    out = tmp_path / "out"
    assert main(["run", str(suite), "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    printed = capsys.readouterr().out
    named = first_named(out)
    assert set(named.values()) == {"pca"}, named
    assert printed.startswith("- pca ranks first")
    stats = json.loads((out / "stats.json").read_text())
    places = {o["configuration"]: o["place"] for o in stats["order"]}
    assert places["pca"] == places["classical_mds"] == "=1"
    assert "It ties with classical_mds" in stats["verdict"]
    # One K everywhere: the lower median of neighbors = [5, 10, 30] is 10.
    assert stats["headline"] == [
        "rnx_auc",
        "trustworthiness@10",
        "continuity@10",
        "distance_spearman",
    ]
    html = (out / "report.html").read_text()
    summaries = html[
        html.index('<section id="verdict">') : html.index('<section id="statistics">')
    ]
    # a tie is said as one, not as a lead "from 0.0000 to 0.0000"
    assert "It scores the same as classical_mds on" in summaries
    assert "Its lead over" not in summaries
    for text in ((out / "leaderboard.md").read_text(), summaries):
        assert "trustworthiness (K = 10)" in text
        assert "trustworthiness (K = 5)" not in text and "trustworthiness (K = 30)" not in text
    assert "trustworthiness@10" in printed  # the terminal heads columns with the keys
    assert "trustworthiness@5" not in printed and "trustworthiness@30" not in printed


def test_a_comparison_names_one_winner_everywhere_with_a_tie(tmp_path: Path, capsys) -> None:
    rng = np.random.default_rng(2)
    t = rng.uniform(0, 3 * np.pi, 90)
    frame = pd.DataFrame(
        {
            "width_mm": np.cos(t) + rng.normal(0, 0.05, 90),
            "depth_mm": np.sin(t) + rng.normal(0, 0.05, 90),
            "height_mm": 0.2 * t + rng.normal(0, 0.05, 90),
        }
    )
    path = tmp_path / "parcels.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "cmp"
    assert (
        main(["compare", str(path), "--quick", "--quiet", "--out", str(out), "--jobs", "1"]) == 0
    )
    printed = capsys.readouterr().out
    named = first_named(out)
    winner = named["stats.json"]
    assert set(named.values()) == {winner}, named
    recommendation = (out / "recommendation.txt").read_text()
    assert re.search(r"^- Use (.+?)\. ", recommendation, re.M).group(1) == winner
    table = printed.split("Recommendation:")[0]
    first_row = next(line for line in table.splitlines() if re.match(r"\s*=?1\s", line))
    assert winner in first_row
    # PCA and classical MDS tie: PCA is listed before classical MDS wherever both appear.
    assert table.index(" pca ") < table.index("classical_mds")
