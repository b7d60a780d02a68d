"""Results folders that survive misuse, through the real command line.

One writer at a time (a second run into a busy folder stops in one line or waits; a killed
run's lock is taken over), folders lowdim owns (a marker; any other non-empty folder refused;
``~`` expanded), records that only improve (an ok job is kept when a later attempt fails),
a report for every store (every job failed, none finished yet), missing or damaged job files
named and recomputed, and a store.sqlite that is not lowdim's refused in one line.

``lowdim.cli.main`` runs in process; a second, concurrent lowdim is a subprocess.
"""

from __future__ import annotations

import json
import logging
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import assert_one_line_error, run_cli

from lowdim import __version__

PYTHON = [sys.executable, "-m", "lowdim"]

PLUGIN = """
import time
from pathlib import Path

from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.decomposition import PCA

from lowdim.methods import register_method


PAUSE = Path(__file__).with_name("pause_seconds")


@register_method("folders_pause")
class Pause(PCA):
    # PCA after a pause read from a file beside the plugin, which is not part of the job's id
    def fit_transform(self, X, y=None):
        time.sleep(float(PAUSE.read_text()) if PAUSE.is_file() else 0.0)
        return super().fit_transform(X, y)


@register_method("folders_raises")
class Raises(TransformerMixin, BaseEstimator):
    def __init__(self, *, n_components=2):
        self.n_components = n_components

    def fit(self, X, y=None):
        raise ArithmeticError("the spectrum of the survey matrix is empty")
"""


@pytest.fixture(scope="module")
def plugin(tmp_path_factory):
    # one file for the module: a plugin is imported once per process
    path = tmp_path_factory.mktemp("plugin") / "folders_plugin.py"
    path.write_text(PLUGIN)
    return path


def set_pause(plugin: Path, seconds: float | None) -> None:
    """How long each ``folders_pause`` job waits before its fit (None: not at all)."""
    path = plugin.with_name("pause_seconds")
    if seconds is None:
        path.unlink(missing_ok=True)
    else:
        path.write_text(str(seconds))


@pytest.fixture(autouse=True)
def no_pause(plugin):
    set_pause(plugin, None)
    yield
    set_pause(plugin, None)


def write_suite(folder: Path, methods: list[str], *, name="survey", timeout=60, seeds="[0]"):
    path = folder / f"{name}.toml"
    path.write_text(
        f'[suite]\nname = "{name}"\nseeds = {seeds}\nneighbors = [5, 10]\ntimeout = {timeout}\n'
        'metrics = ["trustworthiness", "continuity"]\n'
        '[[datasets]]\nname = "swiss_roll"\nn = 60\n'
        '[[datasets]]\nname = "two_moons"\nn = 60\n'
        + "".join(f'[[methods]]\nname = "{m}"\n' for m in methods)
    )
    return path


def lock_record(out: Path) -> dict | None:
    try:
        text = (out / ".lowdim-lock").read_text()
        return json.loads(text) if text.strip() else None
    except (OSError, ValueError):
        return None


def start_holding_run(suite, out, plugin, pause, cwd) -> subprocess.Popen:
    """A run in another process whose jobs each pause ``pause`` seconds; returns once it
    holds the folder and has recorded its plan."""
    set_pause(plugin, pause)
    args = ["run", str(suite), "--out", str(out), "--plugin", str(plugin), "-j", "1", "-q"]
    proc = subprocess.Popen(
        [*PYTHON, *args, "--no-report"],
        cwd=cwd,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 120
    while (lock_record(out) or {}).get("pid") != proc.pid or not planned(out):
        assert proc.poll() is None and time.monotonic() < deadline, proc.stderr.read()
        time.sleep(0.05)
    return proc


def planned(out: Path) -> int:
    """Jobs the run in ``out`` has planned so far (0 while its store is being created)."""
    try:
        db = sqlite3.connect(f"file:{out / 'store.sqlite'}?mode=ro", uri=True)
        try:
            return db.execute("SELECT COUNT(*) FROM planned").fetchone()[0]
        finally:
            db.close()
    except sqlite3.Error:
        return 0


def statuses(out: Path) -> dict[str, str]:
    db = sqlite3.connect(f"file:{out / 'store.sqlite'}?mode=ro", uri=True)
    try:
        return dict(db.execute("SELECT job_id, status FROM jobs"))
    finally:
        db.close()


def tree(folder: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(folder)): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


# --- one writer at a time


def test_a_second_run_into_a_busy_folder_says_which_run_and_stops_or_waits(
    tmp_path, plugin, capsys, caplog
):
    suite = write_suite(tmp_path, ["folders_pause"])
    out = tmp_path / "out"
    first = start_holding_run(suite, out, plugin, pause=4, cwd=tmp_path)
    try:
        args = ["run", suite, "--out", out, "--plugin", plugin, "-j", "1", "-q", "--no-report"]
        status, _, err = run_cli(args, capsys)
        assert_one_line_error(
            status, err, f"{str(out)!r} is in use by another lowdim run", f"pid {first.pid} on"
        )
        assert "--wait" in err and "since 20" in err and "run " + str(suite) in err
        with caplog.at_level(logging.WARNING, logger="lowdim"):
            status, _, err = run_cli([*args, "--wait"], capsys)
        assert status == 0, err
        assert "waiting for the run writing into" in caplog.text
        # it started once the first run had ended: every job was the first run's
        assert "2 jobs, 0 run, 2 already done" in err
    finally:
        first.wait(timeout=120)
    assert first.returncode == 0, first.stderr.read()
    assert set(statuses(out).values()) == {"ok"}
    assert lock_record(out) is None  # released with nothing recorded


def test_a_run_killed_mid_job_leaves_a_folder_the_next_run_takes_over(
    tmp_path, plugin, capsys, caplog
):
    suite = write_suite(tmp_path, ["folders_pause"])
    out = tmp_path / "out"
    killed = start_holding_run(suite, out, plugin, pause=60, cwd=tmp_path)
    os.kill(killed.pid, signal.SIGKILL)
    killed.wait()
    killed.stderr.close()
    set_pause(plugin, None)
    # the store of a run that finished no job: status and the report say so
    status, shown, err = run_cli(["status", out], capsys)
    assert status == 0, err
    assert "did not finish" in shown and "0 ok" in shown and "2 pending" in shown
    status, said, err = run_cli(["report", out], capsys)
    assert status == 0, err
    page = (out / "report.html").read_text()
    assert "No job of the latest run has finished yet" in page
    # the killed run's lock record is stale: the next run takes the folder over
    args = ["run", suite, "--out", out, "--plugin", plugin, "-j", "1", "-q", "--no-report"]
    with caplog.at_level(logging.WARNING, logger="lowdim"):
        status, _, err = run_cli(args, capsys)
    assert status == 0, err
    assert "taking over the results folder" in caplog.text
    assert f"pid {killed.pid} on" in caplog.text
    assert "2 jobs, 2 run, 0 already done, 2 ok" in err
    assert lock_record(out) is None


# --- folders lowdim owns


def test_a_folder_lowdim_did_not_create_is_refused_untouched(tmp_path, capsys):
    suite = write_suite(tmp_path, ["pca"])
    mine = tmp_path / "thesis"
    (mine / "figures").mkdir(parents=True)
    (mine / "figures" / "gallery.png").write_bytes(b"my own figure")
    (mine / "report.html").write_text("<p>chapter 3</p>")
    (mine / "notes.txt").write_text("do not lose")
    before = tree(mine)
    for args in (["run", suite, "--out", mine], ["compare", tmp_path / "x.csv", "--out", mine]):
        if args[0] == "compare":
            (tmp_path / "x.csv").write_text(
                "a,b,c\n" + "\n".join(f"{i},{i % 7},{i % 3}" for i in range(30))
            )
        status, _, err = run_cli(args, capsys)
        assert_one_line_error(
            status, err, f"--out {str(mine)!r} holds files lowdim did not write", "new or empty"
        )
    assert tree(mine) == before and sorted(p.name for p in mine.iterdir()) == [
        "figures",
        "notes.txt",
        "report.html",
    ]


def test_a_new_folder_is_marked_and_an_earlier_lowdims_folder_is_adopted(tmp_path, capsys):
    suite = write_suite(tmp_path, ["pca"])
    out = tmp_path / "results" / "survey"
    status, _, err = run_cli(["run", suite, "--out", out, "-j", "1", "-q", "--no-report"], capsys)
    assert status == 0, err
    marker = json.loads((out / ".lowdim-results").read_text())
    assert marker["lowdim"] == __version__ and marker["created"].startswith("20")
    # a folder written before the marker existed: its store makes it lowdim's
    (out / ".lowdim-results").unlink()
    (out / "notes.txt").write_text("kept")
    status, _, err = run_cli(["run", suite, "--out", out, "-j", "1", "-q"], capsys)
    assert status == 0, err
    assert "2 jobs, 0 run, 2 already done" in err
    assert (out / ".lowdim-results").is_file() and (out / "report.html").is_file()
    # a report replaces only the figures it draws; the user's own files stay
    (out / "figures" / "mine.png").write_bytes(b"mine")
    status, _, err = run_cli(["report", out], capsys)
    assert status == 0, err
    assert (out / "figures" / "mine.png").read_bytes() == b"mine"
    assert (out / "notes.txt").read_text() == "kept"


def test_out_with_a_tilde_is_the_home_folder(tmp_path, capsys, monkeypatch):
    home, work = tmp_path / "home", tmp_path / "work"
    home.mkdir()
    work.mkdir()
    (home / ".profile").write_text("# the user's own")
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.chdir(work)
    suite = write_suite(work, ["pca"])
    status, _, err = run_cli(["run", suite, "--out", "~/maps", "-j", "1", "-q"], capsys)
    assert status == 0, err
    assert f"results in {home / 'maps'}" in err
    assert (home / "maps" / "report.html").is_file() and (home / "maps" / "store.sqlite").is_file()
    status, shown, err = run_cli(["status", "~/maps"], capsys)
    assert status == 0 and "2 ok" in shown, err
    status, _, err = run_cli(["report", "~/maps"], capsys)
    assert status == 0, err
    # the home folder itself holds the user's files: refused like any other folder
    status, _, err = run_cli(["run", suite, "--out", "~"], capsys)
    assert_one_line_error(status, err, f"--out {str(home)!r} holds files lowdim did not write")
    assert not (work / "~").exists()
    assert sorted(p.name for p in work.iterdir()) == ["survey.toml"]


# --- records that only improve


def test_a_job_that_finished_ok_is_kept_when_a_later_attempt_fails(
    tmp_path, plugin, capsys, caplog
):
    out = tmp_path / "out"
    generous = write_suite(tmp_path, ["folders_pause"], name="survey")
    args = ["--out", out, "--plugin", plugin, "-j", "1", "-q", "--no-report"]
    status, _, err = run_cli(["run", generous, *args], capsys)
    assert status == 0, err
    before = statuses(out)
    assert set(before.values()) == {"ok"}
    db = sqlite3.connect(out / "store.sqlite")
    scores = sorted(db.execute("SELECT * FROM scores"))
    db.close()
    # the same jobs under a one-second limit (the limit is not part of a job's id), with one
    # embedding lost: that job runs again, times out, and its ok record stays
    tight = tmp_path / "tight" / "survey.toml"
    tight.parent.mkdir()
    tight.write_text(generous.read_text().replace("timeout = 60", "timeout = 1"))
    lost = out / "embeddings" / f"{sorted(before)[0]}.npy"
    lost.unlink()
    set_pause(plugin, 10)
    with caplog.at_level(logging.WARNING, logger="lowdim"):
        status, _, err = run_cli(["run", tight, *args], capsys)
    assert status == 0, err
    assert "2 jobs, 1 run, 1 already done, 1 timeout" in err
    assert "timeout this time; its earlier ok result is kept (--force replaces it)" in caplog.text
    assert statuses(out) == before
    db = sqlite3.connect(out / "store.sqlite")
    assert sorted(db.execute("SELECT * FROM scores")) == scores
    db.close()
    # --force is the user's word: the failing attempts replace the records
    status, _, err = run_cli(["run", tight, *args, "--force"], capsys)
    assert status == 0, err
    assert set(statuses(out).values()) == {"timeout"}
    assert not list((out / "embeddings").glob("*.npy"))


# --- a report for every store


def test_the_report_is_written_when_every_job_failed(tmp_path, plugin, capsys):
    suite = write_suite(tmp_path, ["folders_raises"], seeds="[0, 1]")
    out = tmp_path / "out"
    args = ["run", suite, "--out", out, "--plugin", plugin, "-j", "1", "-q"]
    status, said, err = run_cli(args, capsys)
    assert status == 0, err
    assert "4 jobs, 4 run, 0 already done, 4 failed" in err
    assert said.startswith("- No configuration finished with scores on any dataset")
    page = (out / "report.html").read_text()
    assert "No configuration finished with scores on any dataset" in page
    failures = page.split("Jobs that did not finish (4)", 1)[1].split("</table>", 1)[0]
    assert failures.count("ArithmeticError: the spectrum of the survey matrix is empty") == 4
    stats = json.loads((out / "stats.json").read_text())
    assert stats["winner"] is None
    status, said, err = run_cli(["report", out], capsys)
    assert status == 0, err
    assert said == f"report written to {out / 'report.html'}\n"


# --- missing or damaged files


def test_missing_and_damaged_job_files_are_named_then_recomputed(tmp_path, capsys):
    suite = write_suite(tmp_path, ["pca", "classical_mds"])
    out = tmp_path / "out"
    args = ["run", suite, "--out", out, "-j", "1", "-q"]
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    whole = {p.name: np.load(p) for p in (out / "embeddings").iterdir()}
    names = sorted(whole)
    (out / "embeddings" / names[0]).unlink()
    cut = out / "embeddings" / names[1]
    cut.write_bytes(cut.read_bytes()[:-100])
    archive = next((out / "quality").iterdir())
    archive.write_bytes(archive.read_bytes()[:200])
    # the report is whole and names each file
    status, _, err = run_cli(["report", out], capsys)
    assert status == 0, err
    page = (out / "report.html").read_text()
    assert "missing or damaged files" in page
    assert f"embeddings/{names[0]} missing" in page
    assert f"embeddings/{names[1]} damaged (cut short" in page
    assert f"quality/{archive.name} damaged" in page
    # status says so
    status, shown, err = run_cli(["status", out], capsys)
    assert status == 0, err
    damaged = 3 if archive.stem not in (names[0][:-4], names[1][:-4]) else 2
    assert f"{damaged} ok jobs have a missing or damaged embedding" in shown
    assert "run the suite again to recompute them" in shown
    # the next plain run recomputes them, and only them
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    assert f"4 jobs, {damaged} run, {4 - damaged} already done, {damaged} ok" in err
    for name, values in whole.items():
        np.testing.assert_array_equal(np.load(out / "embeddings" / name), values)
    status, shown, err = run_cli(["status", out], capsys)
    assert "missing or damaged" not in shown
    assert "missing or damaged files" not in (out / "report.html").read_text()


# --- a store.sqlite that is not lowdim's


def _foreign(path: Path) -> None:
    db = sqlite3.connect(path)
    db.execute("CREATE TABLE invoices (customer TEXT, amount REAL)")
    db.execute("INSERT INTO invoices VALUES ('orchard', 12.5)")
    db.commit()
    db.close()


def _cut_short(path: Path) -> None:
    # a lowdim store of many jobs, then half of it lost (a copy cut short by a full disk)
    from lowdim.run.store import Store
    from lowdim.run.suites import suite_from_dict

    suite = suite_from_dict(
        {
            "suite": {"name": "big", "seeds": list(range(40))},
            "datasets": [{"name": "swiss_roll", "n": 50}],
            "methods": [{"name": "pca"}, {"name": "classical_mds"}],
        },
        "big.toml",
    )
    with Store(path.parent) as store:
        for job in suite.jobs():
            values = [("trustworthiness", k, 0.5) for k in range(1, 30)]
            store.record({"job": job, "status": "failed", "error": "x" * 300, "values": values})
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    for extra in path.parent.iterdir():
        if extra != path:
            extra.unlink() if extra.is_file() else None


@pytest.mark.parametrize(
    "make, words",
    [
        (lambda p: p.write_text("job_id,status\n1,ok\n"), "is not an SQLite database"),
        (_foreign, "is an SQLite database without lowdim's tables"),
        (_cut_short, "is damaged (SQLite says: database disk image is malformed)"),
    ],
    ids=["text", "foreign", "cut-short"],
)
@pytest.mark.parametrize("command", ["status", "report", "run"])
def test_a_store_that_is_not_lowdims_is_one_line_and_left_alone(
    tmp_path, capsys, make, words, command
):
    suite = write_suite(tmp_path, ["pca"])
    out = tmp_path / "out"
    out.mkdir()
    store = out / "store.sqlite"
    make(store)
    before = store.read_bytes()
    args = {"status": ["status", out], "report": ["report", out]}.get(
        command, ["run", suite, "--out", out, "-j", "1", "-q"]
    )
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, f"{str(store)!r}", words, "move it away")
    assert store.read_bytes() == before
    left = {p.name for p in out.iterdir()}
    assert not left & {"report.html", "stats.json", "scores.csv", "embeddings", "figures"}
    if "damaged" not in words:  # refused before lowdim writes anything at all
        assert left == {"store.sqlite"}
