"""Time and memory limits through `lowdim run`: what they count, stop and leave behind."""

from __future__ import annotations

import sqlite3
import subprocess
import sys
from pathlib import Path

import psutil

PYTHON = [sys.executable, "-m", "lowdim"]

HELPERS = """
import os
import subprocess
import sys
import time

import numpy as np
from sklearn.decomposition import PCA

from lowdim.methods import register_method

PIDS = {pids!r}


def start_helpers(tag):
    helper = os.fork()
    if helper == 0:  # a forked helper that sleeps, as a method's worker pool might
        time.sleep(300)
        os._exit(0)
    sleeper = subprocess.Popen(["sleep", "300"])
    with open(PIDS, "a") as fh:
        fh.write(f"{{tag}} {{helper}} {{sleeper.pid}}\\n")


@register_method("pg_hangs")
class Hangs(PCA):
    def fit_transform(self, X, y=None):
        start_helpers("hangs")
        while True:
            time.sleep(1)


@register_method("pg_returns")
class Returns(PCA):
    def fit_transform(self, X, y=None):
        start_helpers("returns")
        return super().fit_transform(X, y)


@register_method("pg_native_oom")
class NativeOutOfMemory(PCA):
    def fit_transform(self, X, y=None):
        # What OpenBLAS prints before it ends the process when an allocation fails.
        os.write(2, b"OpenBLAS error: Memory allocation still failed after 10 retries, "
                    b"giving up.\\n")
        os._exit(1)


@register_method("pg_crashes")
class Crashes(PCA):
    def fit_transform(self, X, y=None):
        os.write(2, b"segmentation fault in a test library\\n")
        os._exit(3)
"""


def lowdim(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([*PYTHON, *args], cwd=cwd, capture_output=True, text=True, timeout=180)


def jobs(out: Path) -> dict[str, tuple[str, str | None]]:
    db = sqlite3.connect(f"file:{out / 'store.sqlite'}?mode=ro", uri=True)
    try:
        return {m: (s, e) for m, s, e in db.execute("SELECT method, status, error FROM jobs")}
    finally:
        db.close()


def suite(folder: Path, methods: list[str], *, memory: str, n: int, timeout: int = 60) -> Path:
    path = folder / "limits.toml"
    path.write_text(
        f'[suite]\nname = "limits"\nneighbors = [5]\ntimeout = {timeout}\n'
        f'memory_limit = "{memory}"\nmetrics = ["trustworthiness"]\n'
        f'[[datasets]]\nname = "swiss_roll"\nn = {n}\n'
        + "".join(f'[[methods]]\nname = "{m}"\n' for m in methods)
    )
    return path


def gone(pid: int) -> bool:
    try:
        return psutil.Process(pid).status() == psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return True


def test_no_process_a_job_starts_outlives_it(tmp_path):
    pids = tmp_path / "pids.txt"
    plugin = tmp_path / "helpers.py"
    plugin.write_text(HELPERS.format(pids=str(pids)))
    path = suite(tmp_path, ["pg_hangs", "pg_returns"], memory="1GB", n=200, timeout=3)
    done = lowdim("run", str(path), "--out", "out", "--plugin", str(plugin), "-j", "2", "-q",
                  "--no-report", cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert {m: s for m, (s, _) in jobs(tmp_path / "out").items()} == {
        "pg_hangs": "timeout",
        "pg_returns": "ok",
    }
    started = [line.split() for line in pids.read_text().splitlines()]
    assert sorted(tag for tag, *_ in started) == ["hangs", "returns"]
    for _, helper, sleeper in started:
        assert gone(int(helper)) and gone(int(sleeper))


def test_memory_limit_counts_the_work_not_the_process_at_rest(tmp_path):
    # PCA of 5,000 x 3 adds a few MB; scikit-learn's RBF KernelPCA of 5,000 points holds the
    # 5,000 x 5,000 float64 kernel, 5000**2 * 8 bytes = 191 MB, on its own over the limit
    # (exact arithmetic). An imported class is not estimated beforehand: it is stopped.
    path = suite(tmp_path, ["pca"], memory="100MB", n=5000)
    path.write_text(
        path.read_text() + '[[methods]]\nimport = "sklearn.decomposition:KernelPCA"\n'
        'label = "sk-kpca"\nkernel = "rbf"\n'
    )
    done = lowdim("run", str(path), "--out", "out", "-j", "2", "-q", "--no-report", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    status = jobs(tmp_path / "out")
    assert status["pca"] == ("ok", None)
    state, error = status["sklearn.decomposition:KernelPCA"]
    assert state == "memory"
    assert "of a job process at rest, over the limit of 100 MB" in error
    # where a method stopped is a result: the stopped job keeps the size of its data
    db = sqlite3.connect(tmp_path / "out" / "store.sqlite")
    shapes = set(db.execute("SELECT status, n_samples, n_features FROM jobs"))
    db.close()
    assert shapes == {("ok", 5000, 3), ("memory", 5000, 3)}


def test_a_suite_that_cannot_fit_its_memory_limit_is_refused_before_it_starts(tmp_path):
    path = suite(tmp_path, ["pca", "kernel_pca"], memory="100MB", n=5000)
    done = lowdim("run", str(path), "--out", "out", cwd=tmp_path)
    assert done.returncode == 2
    assert done.stderr.splitlines() == [
        f"lowdim: error: {path}: the 2nd [[methods]] (kernel_pca) on the 1st [[datasets]] "
        "(swiss_roll(n=5000), n = 5000, D = 3): the dense n x n kernel matrix (1 x 8 bytes x "
        "n^2, besides the data) needs about 191.1 MB, more than `memory_limit` = 100.0 MB in "
        "[suite]; raise `memory_limit`, lower `n`, or set `n_landmarks` (Nyström)"
    ]
    assert not (tmp_path / "out").exists()


def test_an_allocation_failure_in_native_code_is_memory_and_a_crash_is_not(tmp_path):
    plugin = tmp_path / "helpers.py"
    plugin.write_text(HELPERS.format(pids=str(tmp_path / "pids.txt")))
    path = suite(tmp_path, ["pca", "pg_native_oom", "pg_crashes"], memory="200MB", n=200)
    done = lowdim("run", str(path), "--out", "out", "--plugin", str(plugin), "-j", "2", "-q",
                  "--no-report", cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr
    status = jobs(tmp_path / "out")
    assert status["pg_native_oom"] == (
        "memory",
        "an allocation failed in compiled code under the limit of 200 MB: the job's process "
        "ended with exit status 1 (it said: OpenBLAS error: Memory allocation still failed "
        "after 10 retries, giving up.)",
    )
    assert status["pg_crashes"] == (
        "failed",
        "the job's process died with exit status 3 before returning a result (it said: "
        "segmentation fault in a test library)",
    )
