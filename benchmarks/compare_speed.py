"""Time ``lowdim compare`` on a 700 x 765 table, phase by phase, and each job's overhead.

The table is made up (a spectrometer's 765 channels on 700 samples of four mixtures drifting
along a hidden process variable; see ``_table``). Targets: the standard comparison with the
five built-in methods under 8 s on 2 cores, and a median job overhead (the job's wall time less
its fit and its scoring) of at most 0.15 s. The peers (scikit-learn's Isomap, LLE forms,
t-SNE, SMACOF) are timed separately: they are not lowdim's code.

    python benchmarks/compare_speed.py [--rows 700] [--columns 765] [--jobs 2] [--peers]
"""

from __future__ import annotations

import argparse
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

BUILT_INS = ("pca", "classical_mds", "kernel_pca", "laplacian_eigenmaps", "diffusion_maps")


def _table(rows: int, columns: int, seed: int = 0) -> pd.DataFrame:
    """Four mixtures' spectra, each a few Gaussian bands, drifting with a process variable."""
    rng = np.random.default_rng(seed)
    channel = np.linspace(0.0, 1.0, columns)
    centres = rng.uniform(0.1, 0.9, size=(4, 3))
    spectra = np.array(
        [sum(np.exp(-((channel - c) ** 2) / 0.002) for c in mix) for mix in centres]
    )
    mixture = rng.integers(0, 4, rows)
    drift = rng.uniform(0.0, 1.0, rows)
    shift = np.outer(np.sin(2 * np.pi * drift), np.cos(8 * np.pi * channel))
    X = spectra[mixture] * (1.0 + drift[:, None]) + 0.2 * shift
    X += rng.normal(0.0, 0.05, X.shape)
    frame = pd.DataFrame(X, columns=[f"ch{i:03d}" for i in range(columns)])
    frame["mixture"] = [f"mix{m}" for m in mixture]
    return frame


def _job_times(out: Path) -> pd.DataFrame:
    with sqlite3.connect(out / "store.sqlite") as con:
        jobs = pd.read_sql_query(
            "SELECT method, method_label, fit_seconds, score_seconds, started, finished "
            "FROM jobs WHERE status = 'ok'",
            con,
        )
    start = pd.to_datetime(jobs["started"], utc=True, format="mixed")
    end = pd.to_datetime(jobs["finished"], utc=True, format="mixed")
    jobs["wall"] = (end - start).dt.total_seconds()
    jobs["overhead"] = jobs["wall"] - jobs["fit_seconds"] - jobs["score_seconds"]
    return jobs


def _compare(path: Path, out: Path, methods: tuple[str, ...], jobs: int) -> float:
    command = [sys.executable, "-m", "lowdim", "compare", str(path), "--labels", "mixture"]
    command += ["--out", str(out), "--jobs", str(jobs), "--quiet"]
    for name in methods:
        command += ["--methods", name]
    tic = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True)
    seconds = time.perf_counter() - tic
    if done.returncode != 0:
        raise SystemExit(done.stderr)
    return seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=700)
    parser.add_argument("--columns", type=int, default=765)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--peers", action="store_true", help="also time the fast peers")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "spectra.csv"
        _table(args.rows, args.columns).to_csv(path, index=False)
        out = Path(tmp) / "builtins"
        seconds = _compare(path, out, BUILT_INS, args.jobs)
        jobs = _job_times(out)
        print(f"compare, five built-in methods, {args.rows} x {args.columns}: {seconds:.1f} s")
        print(
            f"  {len(jobs)} jobs: fit {jobs['fit_seconds'].sum():.1f} s, scoring "
            f"{jobs['score_seconds'].sum():.1f} s, job wall {jobs['wall'].sum():.1f} s in all"
        )
        median = statistics.median(jobs["overhead"])
        print(
            f"  job overhead (wall - fit - scoring): median {median:.3f} s, 90th percentile "
            f"{jobs['overhead'].quantile(0.9):.3f} s (target <= 0.15 s)"
        )
        if args.peers:
            from lowdim.methods.peers import peer_tables

            tables, _ = peer_tables("fast", int(0.8 * args.rows))
            names = tuple(dict.fromkeys(t["name"] for t in tables))
            out = Path(tmp) / "peers"
            seconds = _compare(path, out, names, args.jobs)
            peers = _job_times(out)
            print(f"compare, the fast peers ({', '.join(names)}): {seconds:.1f} s")
            for name, part in peers.groupby("method"):
                print(f"  {name}: {len(part)} jobs, fit {part['fit_seconds'].sum():.1f} s")


if __name__ == "__main__":
    main()
