"""``lowdim report DIR`` rebuilds every output from the store alone."""

from __future__ import annotations

import json
import shutil
import sqlite3
from pathlib import Path

import numpy as np

from lowdim.cli import main

OUTPUTS = ("scores.csv", "stats.json", "leaderboard.csv", "leaderboard.md", "leaderboard.tex")


def small_store(folder: Path) -> Path:
    """Two datasets x two methods x two seeds in DEVELOPERS.md's schema (invented numbers)."""
    (folder / "embeddings").mkdir(parents=True)
    con = sqlite3.connect(folder / "store.sqlite")
    con.executescript(
        """
        CREATE TABLE jobs (job_id TEXT PRIMARY KEY, dataset TEXT, dataset_label TEXT,
            dataset_params TEXT, method TEXT, method_label TEXT, method_params TEXT,
            seed INTEGER, n_components INTEGER, status TEXT, error TEXT, fit_seconds REAL,
            peak_mb REAL, n_samples INTEGER, n_features INTEGER, sample_size INTEGER,
            started TEXT, finished TEXT, lowdim_version TEXT, run_id INTEGER);
        CREATE TABLE scores (job_id TEXT, metric TEXT, k INTEGER, value REAL,
            PRIMARY KEY (job_id, metric, k));
        CREATE TABLE runs (run_id INTEGER PRIMARY KEY, command TEXT, suite_name TEXT,
            suite_path TEXT, suite_text TEXT, environment TEXT, started TEXT, finished TEXT);
        """
    )
    con.execute(
        "INSERT INTO runs VALUES (1, 'lowdim run tiny.toml', 'tiny', 'tiny.toml', "
        "'[suite]', '{}', '2024-01-01T00:00:00+00:00', '2024-01-01T00:00:09+00:00')"
    )
    rng = np.random.default_rng(3)
    for d, (name, n) in enumerate((("helix", 30), ("torus", 40))):
        for m, method in enumerate(("pca", "diffusion_maps")):
            for seed in (0, 1):
                job = f"j{d}{m}{seed}"
                con.execute(
                    "INSERT INTO jobs VALUES (?,?,?,?,?,?,?,?,2,'ok',NULL,0.1,50,?,3,NULL,"
                    "NULL,NULL,'0.1.0',1)",
                    (
                        job,
                        name,
                        name,
                        json.dumps({"name": name, "n": n, "seed": seed}),
                        method,
                        method,
                        json.dumps({"name": method}),
                        seed,
                        n,
                    ),
                )
                q = 0.6 + 0.2 * m + 0.01 * seed
                con.executemany(
                    "INSERT INTO scores VALUES (?,?,?,?)",
                    [
                        (job, "trustworthiness", 5, q),
                        (job, "rnx_auc", 0, q - 0.3),
                        (job, "fit_seconds", 0, 0.1),
                    ],
                )
                np.save(folder / "embeddings" / f"{job}.npy", rng.standard_normal((n, 2)))
    con.commit()
    con.close()
    return folder


def test_report_rebuilds_the_same_outputs_from_the_store(tmp_path: Path, capsys) -> None:
    folder = small_store(tmp_path / "tiny")
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


def test_unknown_selection_criterion_names_the_closest(tmp_path: Path, capsys) -> None:
    folder = small_store(tmp_path / "tiny")
    assert main(["report", str(folder), "--select", "rnx_aux"]) == 2
    err = capsys.readouterr().err
    assert "rnx_aux" in err and "did you mean 'rnx_auc'" in err


def test_named_selection_criterion_is_used(tmp_path: Path) -> None:
    folder = small_store(tmp_path / "tiny")
    assert main(["report", str(folder), "--select", "trustworthiness@5"]) == 0
    assert "selection criterion trustworthiness@5" in (folder / "report.html").read_text()
