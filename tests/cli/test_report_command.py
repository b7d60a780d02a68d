"""``lowdim report DIR`` rebuilds every output from the store alone."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from lowdim.cli import main

OUTPUTS = ("scores.csv", "stats.json", "leaderboard.csv", "leaderboard.md", "leaderboard.tex")


def test_report_rebuilds_the_same_outputs_from_the_store(
    tmp_path: Path, capsys, write_store
) -> None:
    folder = write_store(tmp_path / "tiny", small=True)
    assert main(["report", str(folder)]) == 0
    assert "report.html" in capsys.readouterr().out
    first = {name: (folder / name).read_bytes() for name in OUTPUTS}
    figures = sorted(p.name for p in (folder / "figures").glob("*.png"))
    assert figures and (folder / "report.html").stat().st_size > 10_000
    for name in (*OUTPUTS, "report.html"):
        (folder / name).unlink()
    shutil.rmtree(folder / "figures")
    assert main(["report", str(folder)]) == 0
    # Everything comes from store.sqlite and embeddings/: a rebuild reproduces the bytes.
    for name, content in first.items():
        assert (folder / name).read_bytes() == content, name
    assert sorted(p.name for p in (folder / "figures").glob("*.png")) == figures
    assert (folder / "report.html").is_file()


def test_folder_without_a_store_is_one_line_and_status_2(tmp_path: Path, capsys) -> None:
    assert main(["report", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(tmp_path) in err and "Traceback" not in err


def test_unknown_selection_criterion_names_the_closest(
    tmp_path: Path, capsys, write_store
) -> None:
    folder = write_store(tmp_path / "tiny", small=True)
    assert main(["report", str(folder), "--select", "rnx_aux"]) == 2
    err = capsys.readouterr().err
    assert "rnx_aux" in err and "did you mean 'rnx_auc'" in err


def test_named_selection_criterion_is_used(tmp_path: Path, write_store) -> None:
    folder = write_store(tmp_path / "tiny", small=True)
    assert main(["report", str(folder), "--select", "trustworthiness@5"]) == 0
    stats = json.loads((folder / "stats.json").read_text())
    assert stats["selection"] == "trustworthiness@5"
    assert "on trustworthiness (K = 5) over 2 datasets" in (folder / "report.html").read_text()


def test_a_suite_headline_list_sets_the_columns(tmp_path: Path, write_store) -> None:
    # A suite may name its headline criteria at their own K, as a published protocol does
    # (van der Maaten et al. 2009 report T(12), C(12) and 1-NN error): those become the
    # leaderboard's columns, in that order; the report reads them from the stored record.
    folder = write_store(tmp_path / "listed", small=True, headline=["continuity@5", "stress"])
    assert main(["report", str(folder)]) == 0
    board = (folder / "leaderboard.md").read_text()
    header = next(line for line in board.splitlines() if line.startswith("| place"))
    assert header == (
        "| place | configuration | overall (mean rank) | continuity (K = 5) | stress ↓ |"
    )
    stats = json.loads((folder / "stats.json").read_text())
    assert stats["headline"] == ["continuity@5", "stress"]


PLUGIN = '''
import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin
from lowdim.methods import register_method


@register_method("report_test_columns")
class FirstColumns(TransformerMixin, BaseEstimator):
    """The first columns, centred: a naive baseline."""

    def __init__(self, n_components=2):
        self.n_components = n_components

    def fit(self, X, y=None):
        self.mean_ = np.asarray(X, float)[:, : self.n_components].mean(axis=0)
        return self

    def transform(self, X):
        return np.asarray(X, float)[:, : self.n_components] - self.mean_
'''

SUITE = """
[suite]
name = "gone"
seeds = [0]
neighbors = [5, 10]
metrics = ["trustworthiness", "rnx_auc"]

[[datasets]]
name = "swiss_roll"
n = 120

[[datasets]]
name = "s_curve"
n = 120

[[methods]]
name = "pca"

[[methods]]
name = "report_test_columns"
"""


def test_the_report_needs_neither_the_suite_file_nor_the_plugin(tmp_path: Path) -> None:
    # A fresh interpreter for each command, as a user's shell would have: the second one never
    # loads the plugin, and the suite file is gone.
    import subprocess
    import sys

    plugin, suite, out = tmp_path / "plugin.py", tmp_path / "gone.toml", tmp_path / "out"
    plugin.write_text(PLUGIN)
    suite.write_text(SUITE)
    command = [sys.executable, "-m", "lowdim"]
    ran = subprocess.run(
        [*command, "run", str(suite), "--out", str(out), "--plugin", str(plugin), "-q"],
        capture_output=True,
        text=True,
    )
    assert ran.returncode == 0, ran.stderr
    first = {name: (out / name).read_bytes() for name in OUTPUTS}
    plugin.unlink()
    suite.unlink()
    again = subprocess.run([*command, "report", str(out)], capture_output=True, text=True)
    assert again.returncode == 0, again.stderr
    for name, content in first.items():
        assert (out / name).read_bytes() == content, name
    stats = json.loads((out / "stats.json").read_text())
    assert {o["configuration"] for o in stats["order"]} == {"pca", "report_test_columns"}
