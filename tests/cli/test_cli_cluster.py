"""`lowdim run --backend dask` on real clusters of several worker processes, with faults.

Every cluster here listens on 127.0.0.1 on free ports and is torn down whatever happens. The
clusters are the two a user meets: ``distributed.LocalCluster`` with worker processes, and a
scheduler with workers started by the ``dask`` command line (with nannies).
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from cli_helpers import finished, rows

distributed = pytest.importorskip("distributed")

PYTHON = [sys.executable, "-m", "lowdim"]

SLOW_PLUGIN = """
import time
from sklearn.decomposition import PCA
from lowdim.methods import register_method

@register_method("cl_slow_pca")
class SlowPCA(PCA):
    def fit_transform(self, X, y=None):
        time.sleep(self.tol + 0.5)
        return super().fit_transform(X, y)
"""


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def lowdim(*args: str, cwd: Path, timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run(
        [*PYTHON, *args], cwd=cwd, capture_output=True, text=True, timeout=timeout
    )


def wait_for(predicate, seconds: float, what: str) -> None:
    deadline = time.monotonic() + seconds
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.1)


def write_suite(folder: Path, name: str, methods: str, *, seeds: str, n: int = 150) -> Path:
    path = folder / f"{name}.toml"
    path.write_text(
        f'[suite]\nname = "{name}"\nseeds = {seeds}\nneighbors = [5]\ntimeout = 60\n'
        'memory_limit = "1GB"\nmetrics = ["trustworthiness", "continuity"]\n'
        f'[[datasets]]\nname = "swiss_roll"\nn = {n}\nnoise = 0.05\n' + methods
    )
    return path


def slow_suite(folder: Path, seeds: int = 6) -> tuple[Path, Path]:
    plugin = folder / "slow_plugin.py"
    plugin.write_text(SLOW_PLUGIN)
    methods = "".join(
        f'[[methods]]\nname = "cl_slow_pca"\nlabel = "slow{i}"\ntol = {i / 10}\n' for i in range(2)
    )
    return write_suite(folder, "slow", methods, seeds=str(list(range(seeds)))), plugin


class CommandLineCluster:
    """``dask scheduler`` and ``dask worker --nworkers 2`` on free loopback ports."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.port = free_port()
        self.address = f"tcp://127.0.0.1:{self.port}"
        self.procs: list[subprocess.Popen] = []
        self.scheduler = self.start_scheduler()
        self.start_workers()

    def start_workers(self) -> None:
        self._spawn(
            "worker", self.address, "--nworkers", "2", "--nthreads", "1", "--host", "127.0.0.1",
            "--no-dashboard", "--local-directory", str(self.folder / "dask-workers"),
        )  # fmt: skip
        with distributed.Client(self.address, timeout=30) as client:
            client.wait_for_workers(2, timeout=60)

    def _spawn(self, *args: str) -> subprocess.Popen:
        log = open(self.folder / f"dask-{args[0]}-{len(self.procs)}.log", "w")  # noqa: SIM115
        proc = subprocess.Popen(
            [sys.executable, "-m", "dask", *args],
            stdout=log,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )
        log.close()
        self.procs.append(proc)
        return proc

    def start_scheduler(self) -> subprocess.Popen:
        proc = self._spawn(
            "scheduler", "--host", "127.0.0.1", "--port", str(self.port), "--no-dashboard"
        )
        wait_for(self._listening, 60, "the scheduler")
        return proc

    def _listening(self) -> bool:
        with socket.socket() as s:
            return s.connect_ex(("127.0.0.1", self.port)) == 0

    def worker_pids(self) -> list[int]:
        with distributed.Client(self.address, timeout=30) as client:
            return sorted(client.run(os.getpid).values())

    def close(self) -> None:
        for proc in self.procs:
            if proc.poll() is None:
                os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()


@pytest.fixture
def cli_cluster(tmp_path):
    cluster = CommandLineCluster(tmp_path)
    try:
        yield cluster
    finally:
        cluster.close()


GREEDY_PLUGIN = """
import time
import numpy as np
from sklearn.decomposition import PCA
from lowdim.methods import register_method

@register_method("cl_hangs")
class Hangs(PCA):
    def fit_transform(self, X, y=None):
        time.sleep(600)

@register_method("cl_greedy")
class Greedy(PCA):
    def fit_transform(self, X, y=None):
        return np.ones((2**31, 1)) @ np.ones((1, 2))  # 16 GB at once: over the address cap
"""


def test_local_cluster_of_two_processes_with_two_threads_matches_local_and_keeps_limits(
    tmp_path,
):
    plugin = tmp_path / "greedy.py"
    plugin.write_text(GREEDY_PLUGIN)
    methods = (
        '[[methods]]\nname = "laplacian_eigenmaps"\nn_neighbors = 8\n'
        '[[methods]]\nname = "diffusion_maps"\nn_neighbors = 10\n'
        '[[methods]]\nimport = "sklearn.decomposition:PCA"\nlabel = "sk-pca"\n'
        '[[methods]]\nname = "cl_hangs"\n[[methods]]\nname = "cl_greedy"\n'
    )
    suite = write_suite(tmp_path, "same", methods, seeds="[0, 1]")
    text = suite.read_text().replace("timeout = 60", "timeout = 10")
    suite.write_text(text.replace('"1GB"', '"512MB"'))
    common = ["--plugin", str(plugin), "--no-report"]
    local = lowdim("run", str(suite), "--out", "local", "-j", "2", "-q", *common, cwd=tmp_path)
    assert local.returncode == 0, local.stderr
    with distributed.LocalCluster(
        host="127.0.0.1", n_workers=2, threads_per_worker=2, processes=True,
        dashboard_address=None,
    ) as cluster:  # fmt: skip
        done = lowdim(
            "run", str(suite), "--out", "dask", "--backend", "dask",
            "--scheduler", cluster.scheduler_address, *common, cwd=tmp_path,
        )  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert "10 jobs, 10 run, 0 already done, 6 ok, 2 timeout, 2 memory" in done.stderr
    # the progress bar moved job by job as results streamed back
    assert "1/10" in done.stderr and "10/10" in done.stderr
    # time and memory limits hold inside daemonic, two-threaded dask workers
    status = rows(tmp_path / "dask", "SELECT method, status, COUNT(*) FROM jobs GROUP BY 1, 2")
    assert ("cl_hangs", "timeout", 2) in status and ("cl_greedy", "memory", 2) in status
    query = (
        "SELECT j.method_label, j.seed, s.metric, s.k, s.value FROM scores s JOIN jobs j "
        "USING (job_id) WHERE s.metric NOT IN ('fit_seconds', 'peak_mb') ORDER BY 1, 2, 3, 4"
    )
    expected = rows(tmp_path / "local", query)
    assert len(expected) == 16  # two criteria per job, and the sigma of the two graph methods
    assert rows(tmp_path / "dask", query) == expected  # bit for bit, whatever the backend


def test_command_line_cluster_loses_a_worker_and_a_driver_and_keeps_every_job_once(
    tmp_path, cli_cluster
):
    suite, plugin = slow_suite(tmp_path)
    args = ["run", str(suite), "--out", "out", "--backend", "dask", "--plugin", str(plugin)]
    args += ["--scheduler", cli_cluster.address, "-q", "--no-report"]
    out = tmp_path / "out"
    driver = subprocess.Popen([*PYTHON, *args], cwd=tmp_path, stderr=subprocess.DEVNULL)
    wait_for(lambda: finished(out) >= 2, 90, "two finished jobs")
    driver.kill()
    driver.wait()
    kept = finished(out)
    assert 2 <= kept < 12

    before = cli_cluster.worker_pids()
    assert len(before) == 2
    driver = subprocess.Popen([*PYTHON, *args], cwd=tmp_path, stderr=subprocess.PIPE, text=True)
    wait_for(lambda: finished(out) >= kept + 1, 90, "a job of the second run")
    os.kill(before[0], signal.SIGKILL)  # one worker process dies mid-run; its nanny restarts it
    _, stderr = driver.communicate(timeout=120)
    assert driver.returncode == 0, stderr
    assert f"12 jobs, {12 - kept} run, {kept} already done, {12 - kept} ok" in stderr
    ids = [r[0] for r in rows(out, "SELECT job_id FROM jobs")]
    assert len(ids) == len(set(ids)) == 12
    assert rows(out, "SELECT DISTINCT status FROM jobs") == [("ok",)]
    assert len(rows(out, "SELECT DISTINCT job_id FROM scores")) == 12
    assert sorted(p.stem for p in (out / "embeddings").glob("*.npy")) == sorted(ids)
    assert before[0] not in cli_cluster.worker_pids()


def test_scheduler_going_away_stops_the_run_in_one_line_and_a_rerun_resumes(tmp_path, cli_cluster):
    suite, plugin = slow_suite(tmp_path, seeds=8)
    args = ["run", str(suite), "--out", "out", "--backend", "dask", "--plugin", str(plugin)]
    args += ["--scheduler", cli_cluster.address, "-q", "--no-report"]
    out = tmp_path / "out"
    driver = subprocess.Popen([*PYTHON, *args], cwd=tmp_path, stderr=subprocess.PIPE, text=True)
    wait_for(lambda: finished(out) >= 2, 90, "two finished jobs")
    os.killpg(cli_cluster.scheduler.pid, signal.SIGKILL)
    _, stderr = driver.communicate(timeout=60)
    assert driver.returncode == 2
    lines = stderr.strip().splitlines()
    assert len(lines) == 1, stderr
    assert lines[0].startswith(f"lowdim: error: the dask scheduler at {cli_cluster.address} went")
    assert lines[0].endswith("finished jobs are kept, run the same command again to resume")
    kept = finished(out)
    assert 2 <= kept < 16

    # the store is the state: the rest of the run resumes anywhere, here on this machine
    local = [a for a in args if a not in ("--backend", "dask", "--scheduler", cli_cluster.address)]
    done = lowdim(*local, "--jobs", "2", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert f"16 jobs, {16 - kept} run, {kept} already done, {16 - kept} ok" in done.stderr
    ids = [r[0] for r in rows(out, "SELECT job_id FROM jobs")]
    assert len(ids) == len(set(ids)) == 16


def test_a_scheduler_address_that_does_not_answer_is_one_line_and_exit_2(tmp_path):
    suite = write_suite(tmp_path, "dead", '[[methods]]\nname = "pca"\n', seeds="[0]")
    address = f"tcp://127.0.0.1:{free_port()}"
    tic = time.monotonic()
    done = lowdim(
        "run", str(suite), "--out", "out", "--backend", "dask", "--scheduler", address,
        cwd=tmp_path, timeout=60,
    )  # fmt: skip
    assert time.monotonic() - tic < 15
    assert done.returncode == 2
    assert done.stderr.strip().splitlines() == [
        f"lowdim: error: no dask scheduler answered at {address} within 5 s (Connection "
        "refused); start one with `dask scheduler` or check --scheduler"
    ]
    assert not (tmp_path / "out").exists()
