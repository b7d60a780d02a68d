"""A million-point job end to end through ``lowdim run``: time, where it goes, peak memory.

    python benchmarks/million_points.py [--n 1000000] [--threads 2] [--methods le dm]

Target (issue 12, part 2): a 1,000,000-point swiss roll job through ``lowdim run`` for
Laplacian eigenmaps and for diffusion maps, each under 60 s and 4 GB on a 2-core machine.

For each method the script writes a one-job suite (swiss roll, noise 0.05, 2 BLAS threads per
job, a 4 GB memory limit), then:

1. runs ``lowdim run SUITE --jobs 1 --no-report`` in a subprocess, timing it from the command
   to the stored result, and sampling every process the command starts (driver, job host,
   job) every 0.1 s for the largest resident set, the peak memory;
2. replays the same job in this process under ``cProfile`` and splits its time into load
   (``datasets.load``), neighbour search (``knn_distance_graph``), eigensolver
   (``smallest_laplacian_eigenpairs`` / ``top_eigenpairs``), the rest of the fit (graph
   weights, normalisation, sign fixing), scoring (``score_embedding``) and storage
   (``Store.record``: the embedding file and the transaction).

The reference point is scikit-learn's ``SpectralEmbedding`` with pyamg on the same data, whose
fit time is printed for the ratio (``--no-peer`` skips it). Run it alone on the machine: both
cores are busy for minutes, and shared cores make the times noisy; the CPU seconds of all the
run's processes and the load average are printed beside the wall time for that reason.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import resource
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import psutil

METHODS = {
    "le": ("laplacian_eigenmaps", "n_neighbors = 10\n"),
    "dm": ("diffusion_maps", "n_neighbors = 15\n"),
}
STAGES = {
    "load": ("specs.py", "load"),
    "neighbours": ("_graphs.py", "knn_distance_graph"),
    "eigensolver": [
        ("_eigen.py", "smallest_laplacian_eigenpairs"),
        ("_eigen.py", "top_eigenpairs"),
    ],
    "scoring": ("_batch.py", "score_embedding"),
}


def write_suite(folder: Path, key: str, n: int, threads: int) -> Path:
    name, params = METHODS[key]
    path = folder / f"million_{key}.toml"
    path.write_text(
        f'[suite]\nname = "million_{key}"\nseeds = [0]\nneighbors = [10]\nthreads = {threads}\n'
        'timeout = 600\nmemory_limit = "4GB"\n'
        'metrics = ["trustworthiness", "fit_seconds", "peak_mb"]\n'
        f'[[datasets]]\nname = "swiss_roll"\nn = {n}\nnoise = 0.05\n'
        f'[[methods]]\nname = "{name}"\n{params}'
    )
    return path


class PeakSampler:
    """The largest resident set of any process under ``pid``, sampled every 0.1 s."""

    def __init__(self, pid: int) -> None:
        self.root = psutil.Process(pid)
        self.peak = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.wait(0.1):
            try:
                procs = [self.root, *self.root.children(recursive=True)]
            except psutil.Error:
                continue
            for proc in procs:
                try:
                    self.peak = max(self.peak, proc.memory_info().rss)
                except psutil.Error:
                    pass

    def stop(self) -> int:
        self._stop.set()
        self._thread.join()
        return self.peak


def end_to_end(suite: Path, out: Path) -> dict:
    command = [sys.executable, "-m", "lowdim", "run", str(suite), "--out", str(out)]
    command += ["--jobs", "1", "--no-report", "-q"]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    tic = time.perf_counter()
    proc = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    sampler = PeakSampler(proc.pid)
    _, stderr = proc.communicate()
    wall = time.perf_counter() - tic
    peak = sampler.stop()
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    if proc.returncode != 0:
        raise SystemExit(f"lowdim run failed ({proc.returncode}): {stderr.strip()}")
    db = sqlite3.connect(out / "store.sqlite")
    status, error, fit, added = db.execute(
        "SELECT status, error, fit_seconds, peak_mb FROM jobs"
    ).fetchone()
    db.close()
    if status != "ok":
        raise SystemExit(f"the job ended {status}: {error}")
    return {"wall": wall, "cpu": cpu, "peak_mb": peak / 2**20, "fit": fit, "fit_added_mb": added}


def _cumulative(stats: pstats.Stats, where: tuple[str, str]) -> float:
    total = 0.0
    for (filename, _, function), (_, _, _, cumulative, _) in stats.stats.items():
        if function == where[1] and filename.endswith(where[0]):
            total = max(total, cumulative)
    return total


def replay(suite: Path, scratch: Path, threads: int) -> dict:
    """The job again in this process, profiled, then stored: seconds per stage."""
    from threadpoolctl import threadpool_limits

    from lowdim.run.limits import Outcome
    from lowdim.run.store import Store
    from lowdim.run.suites import load_suite
    from lowdim.run.worker import execute_job, job_record

    (job,) = load_suite(suite).jobs()
    profile = cProfile.Profile()
    tic = time.perf_counter()
    with threadpool_limits(limits=threads):
        value = profile.runcall(execute_job, job)
    total = time.perf_counter() - tic
    stats = pstats.Stats(profile)
    seconds = {}
    for stage, where in STAGES.items():
        places = where if isinstance(where, list) else [where]
        seconds[stage] = sum(_cumulative(stats, place) for place in places)
    seconds["other fit work"] = (
        value["fit_seconds"] - seconds["neighbours"] - seconds["eigensolver"]
    )
    seconds["other"] = total - sum(seconds.values())
    record = job_record(job, Outcome("ok", value=value), value["started"])
    tic = time.perf_counter()
    with Store(scratch) as store:
        store.record(record)
    seconds["storage"] = time.perf_counter() - tic
    return seconds


def sklearn_peer(n: int, threads: int) -> float:
    """Fit seconds of scikit-learn's SpectralEmbedding (pyamg) on the same swiss roll."""
    from sklearn.manifold import SpectralEmbedding
    from threadpoolctl import threadpool_limits

    from lowdim.datasets import load

    X = load({"name": "swiss_roll", "n": n, "noise": 0.05, "seed": 0}).X
    with threadpool_limits(limits=threads):
        tic = time.perf_counter()
        SpectralEmbedding(
            n_components=2, affinity="nearest_neighbors", n_neighbors=10, eigen_solver="amg",
            random_state=0, n_jobs=threads,
        ).fit(X)  # fmt: skip
        return time.perf_counter() - tic


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--threads", type=int, default=2)
    parser.add_argument("--methods", nargs="+", choices=sorted(METHODS), default=["le", "dm"])
    parser.add_argument("--no-peer", action="store_true", help="skip scikit-learn's fit")
    args = parser.parse_args()
    print(f"{args.n:,} points, {args.threads} threads, {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory(prefix="lowdim-million-") as tmp:
        folder = Path(tmp)
        for key in args.methods:
            suite = write_suite(folder, key, args.n, args.threads)
            e2e = end_to_end(suite, folder / f"out_{key}")
            stages = replay(suite, folder / f"replay_{key}", args.threads)
            whole = sum(stages.values())
            name = METHODS[key][0]
            target = "met" if e2e["wall"] < 60 and e2e["peak_mb"] < 4096 else "MISSED"
            print(
                f"\n{name}: lowdim run {e2e['wall']:.1f} s end to end ({e2e['cpu']:.0f} CPU s "
                f"in all its processes, load average {os.getloadavg()[0]:.1f}), peak resident "
                f"{e2e['peak_mb']:.0f} MB (the fit added {e2e['fit_added_mb']:.0f} MB), fit "
                f"{e2e['fit']:.1f} s; target 60 s and 4 GB: {target}"
            )
            print(f"  replayed job {whole:.1f} s:")
            for stage, sec in stages.items():
                print(f"    {stage:<15} {sec:6.1f} s  {100 * sec / whole:5.1f} %")
        if not args.no_peer:
            peer = sklearn_peer(args.n, args.threads)
            print(f"\nsklearn SpectralEmbedding (amg, k = 10) fit: {peer:.1f} s")


if __name__ == "__main__":
    main()
