"""`lowdim run` and `lowdim status` end to end, through the command line in a subprocess."""

from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from cli_helpers import finished, rows
from run_fakes import write_plugin

PYTHON = [sys.executable, "-m", "lowdim"]


def lowdim(*args: str, cwd: Path, timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run(
        [*PYTHON, *args], cwd=cwd, capture_output=True, text=True, timeout=timeout
    )


def write_suite(folder: Path, name: str, methods: str, *, seeds="[0, 1]", n=120, timeout=3):
    path = folder / f"{name}.toml"
    path.write_text(
        f'[suite]\nname = "{name}"\nseeds = {seeds}\nneighbors = [5, 10]\n'
        f'timeout = {timeout}\nmemory_limit = "2GB"\n'
        'metrics = ["trustworthiness", "continuity", "knn_accuracy"]\n'
        f'[[datasets]]\nname = "swiss_roll"\nn = {n}\nnoise = 0.05\nlabels = "checker:2x2"\n'
        f'[[datasets]]\nname = "two_moons"\nn = {n}\nnoise = 0.05\n' + methods
    )
    return path


def score_lines(folder: Path) -> list[tuple]:
    with open(folder / "scores.csv", newline="") as fh:
        return sorted(tuple(r) for r in csv.reader(fh))


@pytest.fixture
def plugin(tmp_path):
    return write_plugin(tmp_path, "e2e")


def test_failures_are_recorded_the_run_goes_on_and_a_rerun_recomputes_nothing(tmp_path, plugin):
    methods = (
        '[[methods]]\nname = "pca"\n'
        '[[methods]]\nimport = "sklearn.decomposition:PCA"\nlabel = "sk-pca"\n'
        '[[methods]]\nname = "e2e_raises"\n'
        '[[methods]]\nname = "e2e_sleeps"\n'
    )
    suite = write_suite(tmp_path, "failing", methods)
    out = tmp_path / "out"
    args = ("run", str(suite), "--out", str(out), "--plugin", str(plugin), "--quiet")
    done = lowdim(*args, "--jobs", "2", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert "16 jobs, 16 run, 0 already done, 8 ok, 4 failed, 4 timeout" in done.stderr
    assert f"report: {out / 'report.html'}" in done.stdout
    status = dict(
        ((m, d, s), (st, e))
        for m, d, s, st, e in rows(
            out, "SELECT method_label, dataset_label, seed, status, error FROM jobs"
        )
    )
    assert len(status) == 16
    for (method, _, _), (state, error) in status.items():
        if method == "e2e_raises":
            assert (state, error) == (
                "failed",
                "ArithmeticError: the spectrum of the test matrix is empty",
            )
        elif method == "e2e_sleeps":
            assert (state, error) == ("timeout", "stopped after the time limit of 3 s")
        else:
            assert (state, error) == ("ok", None)
    assert rows(out, "PRAGMA integrity_check") == [("ok",)]
    # PCA from lowdim and from scikit-learn are the same projection: trustworthiness, a
    # function of neighbour ranks only, is identical (scikit-learn PCA, common practice).
    means = dict(
        rows(
            out,
            "SELECT j.method_label || '/' || j.dataset_label || '/' || j.seed "
            "|| '/' || s.k, s.value FROM scores s JOIN jobs j USING (job_id) "
            "WHERE s.metric = 'trustworthiness'",
        )
    )
    for key, value in means.items():
        if key.startswith("pca/"):
            assert means["sk-pca/" + key[4:]] == pytest.approx(value, abs=1e-12)
    before = score_lines(out)
    stamps = {p.name: p.stat().st_mtime_ns for p in (out / "embeddings").iterdir()}
    assert len(stamps) == 8

    again = lowdim(*args, "--no-report", cwd=tmp_path)
    assert again.returncode == 0, again.stderr
    assert "16 jobs, 0 run, 16 already done" in again.stderr
    # the verdict first, rendered from the store like every output
    assert again.stdout.startswith("- ") and "ranks first of 4 configurations" in again.stdout
    assert {p.name: p.stat().st_mtime_ns for p in (out / "embeddings").iterdir()} == stamps
    assert score_lines(out) == before
    assert rows(out, "SELECT COUNT(*) FROM runs") == [(2,)]

    shown = lowdim("status", str(out), cwd=tmp_path)
    assert shown.returncode == 0, shown.stderr
    assert "16 jobs: 8 ok, 4 failed, 4 timeout, 0 memory, 0 pending" in shown.stdout
    assert "e2e_raises on swiss_roll" in shown.stdout and "slowest fits:" in shown.stdout


def test_scores_are_identical_whatever_jobs_and_backend(tmp_path):
    methods = (
        '[[methods]]\nname = "laplacian_eigenmaps"\nn_neighbors = 8\n'
        '[[methods]]\nname = "kernel_pca"\nkernel = "rbf"\nbandwidth = "median"\n'
        '[[methods]]\nname = "diffusion_maps"\nn_neighbors = 10\n'
    )
    suite = write_suite(tmp_path, "same", methods, seeds="[0]", timeout=60)
    results = {}
    for jobs in ("1", "2"):
        out = tmp_path / f"jobs{jobs}"
        done = lowdim(
            "run", str(suite), "--out", str(out), "--jobs", jobs, "-q", "--no-report", cwd=tmp_path
        )
        assert done.returncode == 0, done.stderr
        results[jobs] = score_lines(out)
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(
        host="127.0.0.1",
        n_workers=1,
        threads_per_worker=1,
        processes=True,
        dashboard_address=None,
    ) as cluster:
        out = tmp_path / "dask"
        done = lowdim(
            "run",
            str(suite),
            "--out",
            str(out),
            "--backend",
            "dask",
            "--scheduler",
            cluster.scheduler_address,
            "-q",
            "--no-report",
            cwd=tmp_path,
        )
        assert done.returncode == 0, done.stderr
        results["dask"] = score_lines(out)
    # exact equality of every stored value, except the runner's time and memory readings
    measured = ("fit_seconds", "peak_mb")
    stable = {k: [r for r in v if r[4] not in measured] for k, v in results.items()}
    assert len({r[0] for r in stable["1"] if r[0] != "job_id"}) == 6
    assert stable["1"] == stable["2"] == stable["dask"]


def test_sigkill_mid_run_then_resume_keeps_every_job_once(tmp_path, plugin):
    slow = tmp_path / "slow_plugin.py"
    slow.write_text(
        "import time\nfrom sklearn.decomposition import PCA\n"
        "from lowdim.methods import register_method\n\n"
        "@register_method('e2e_slow_pca')\nclass SlowPCA(PCA):\n"
        "    def fit_transform(self, X, y=None):\n"
        "        time.sleep(0.4)\n"
        "        return super().fit_transform(X, y)\n"
    )
    methods = "".join(
        f'[[methods]]\nname = "e2e_slow_pca"\nlabel = "slow{i}"\nwhiten = {w}\n'
        for i, w in enumerate(["true", "false"])
    )
    suite = write_suite(tmp_path, "killed", methods, seeds="[0, 1, 2, 3]", n=100, timeout=30)
    out = tmp_path / "out"
    args = ["run", str(suite), "--out", str(out), "--plugin", str(slow), "--jobs", "2", "-q"]
    args.append("--no-report")
    proc = subprocess.Popen([*PYTHON, *args], cwd=tmp_path, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 90
    while time.monotonic() < deadline and finished(out) < 3:
        time.sleep(0.05)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    proc.stderr.close()
    kept = rows(out, "SELECT job_id FROM jobs")
    assert 3 <= len(kept) < 16
    assert rows(out, "PRAGMA integrity_check") == [("ok",)]
    done = lowdim(*args, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert f"16 jobs, {16 - len(kept)} run, {len(kept)} already done" in done.stderr
    ids = [r[0] for r in rows(out, "SELECT job_id FROM jobs")]
    assert len(ids) == len(set(ids)) == 16
    assert rows(out, "PRAGMA integrity_check") == [("ok",)]
    per_job = rows(out, "SELECT job_id, COUNT(*) FROM scores GROUP BY job_id")
    assert len(per_job) == 16 and len({n for _, n in per_job}) == 1
    assert sorted(p.stem for p in (out / "embeddings").glob("*.npy")) == sorted(ids)


BAD_SUITES = [
    (
        '[suite]\nname = "v"\nseeds = [0,\n',
        "lowdim: error: {path}: not valid TOML: Invalid value (at end of document)",
    ),
    (
        '[suite]\nname = "v"\n[[datasets]]\nname = "swiss_roll"\n'
        '[[methods]]\nname = "pca"\n[[methods]]\nname = "pca"\nsolver = "full"\n'
        '[[methods]]\nname = "kernel_pcaa"\n',
        "lowdim: error: {path}: the 3rd [[methods]]: `name`: unknown method 'kernel_pcaa' "
        "(did you mean 'kernel_pca'?)",
    ),
    (
        '[suite]\nname = "v"\n[[datasets]]\nname = "swiss_roll"\n'
        '[[methods]]\nname = "kernel_pca"\nbandwith = 1.0\n',
        "lowdim: error: {path}: the 1st [[methods]]: unknown parameter `bandwith` of "
        "kernel_pca (did you mean 'bandwidth'?)",
    ),
    (
        '[suite]\nname = "v"\nmetrics = ["trustworthyness"]\n[[datasets]]\n'
        'name = "swiss_roll"\n[[methods]]\nname = "pca"\n',
        "lowdim: error: {path}: [suite]: `metrics` names an unknown criterion "
        "'trustworthyness' (did you mean 'trustworthiness'?)",
    ),
]

# One interpreter runs every bad suite through `cli.main`, as the console script does; starting
# one interpreter per case would cost seconds each and test nothing more.
_CHECK = """
import contextlib, io, json, sys
from lowdim.cli import main
out = []
for path in sys.argv[1:]:
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["run", path, "--out", path + ".out"])
    out.append([code, err.getvalue()])
print(json.dumps(out))
"""


def test_validation_errors_are_one_line_exit_2_and_write_nothing(tmp_path):
    paths = []
    for i, (body, _) in enumerate(BAD_SUITES):
        paths.append(tmp_path / f"bad{i}.toml")
        paths[-1].write_text(body)
    done = subprocess.run(
        [sys.executable, "-c", _CHECK, *map(str, paths)],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    for path, (_, expected), (code, stderr) in zip(
        paths, BAD_SUITES, json.loads(done.stdout), strict=True
    ):
        assert code == 2
        lines = stderr.strip().splitlines()
        assert len(lines) == 1, stderr
        assert lines[0].startswith(expected.format(path=path)), lines[0]
        assert not Path(f"{path}.out").exists()
    assert not (tmp_path / "results").exists()
