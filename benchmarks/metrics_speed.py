"""Speed of the quality criteria against scikit-learn on the same data, in one run.

1. trustworthiness at n = 4,000 (10-D lifted swiss roll, two embeddings, k = 5, 10, 30):
   lowdim's blocked exact ranks against ``sklearn.manifold.trustworthiness``; the values must
   agree and lowdim should be at least 5 x faster.
2. trustworthiness + continuity + rnx at k = 10 on n = 50,000 through ``score_embedding``
   (which also reports R_NX on its log grid of K): target under 30 s together. n is above the
   exact threshold, so T and C come from random query points (printed with their standard
   errors); R_NX is exact from the neighbour lists. scikit-learn's function would need two
   50,000 x 50,000 matrices (40 GB), so it is not run there.

Run: ``python benchmarks/metrics_speed.py`` (about a minute on two cores). Wall and CPU
seconds are both printed: lowdim's blocks run in threads (up to the BLAS thread limit),
scikit-learn's sort runs in one, so on a busy machine the CPU ratio is the fairer one.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from functools import partial

import numpy as np
from sklearn.manifold import trustworthiness as sklearn_trustworthiness

from lowdim.metrics import score_embedding, trustworthiness


def lifted_roll(n: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A swiss roll rotated into 10-D with noise; a fair 2-D embedding and a PCA one."""
    rng = np.random.default_rng(seed)
    t = rng.uniform(1.5 * np.pi, 4.5 * np.pi, n)
    h = rng.uniform(0, 20, n)
    roll = np.c_[t * np.cos(t), h, t * np.sin(t), np.zeros((n, 7))]
    rotation, _ = np.linalg.qr(rng.normal(size=(10, 10)))
    X = roll @ rotation + 0.2 * rng.normal(size=(n, 10))
    fair = np.c_[t, h / 3] + 0.05 * rng.normal(size=(n, 2))
    centred = X - X.mean(axis=0)
    _, _, vt = np.linalg.svd(centred, full_matrices=False)
    return X, fair, centred @ vt[:2].T


def best_of(repeats: int, fn: Callable[[], float]) -> tuple[float, float, float]:
    """Least wall-clock and CPU seconds over ``repeats`` runs, and the value."""
    wall, cpu, value = [], [], float("nan")
    for _ in range(repeats):
        tic, cpu_tic = time.perf_counter(), time.process_time()
        value = fn()
        wall.append(time.perf_counter() - tic)
        cpu.append(time.process_time() - cpu_tic)
    return min(wall), min(cpu), value


def part_one() -> None:
    n = 4000
    X, fair, pca = lifted_roll(n)
    print(f"1. trustworthiness, n = {n}, X 10-D; best of 3 runs each, wall (CPU) seconds")
    print(f"   {'embedding':<10}{'k':>3}{'lowdim':>15}{'scikit-learn':>15}{'ratio':>13}  |diff|")
    for label, Y in (("fair", fair), ("pca", pca)):
        for k in (5, 10, 30):
            ours = best_of(3, partial(trustworthiness, X, Y, k=k))
            ref = best_of(3, partial(sklearn_trustworthiness, X, Y, n_neighbors=k))
            print(
                f"   {label:<10}{k:>3}{ours[0]:>8.3f} ({ours[1]:.2f}){ref[0]:>8.3f} ({ref[1]:.2f})"
                f"{ref[0] / ours[0]:>6.1f}x ({ref[1] / ours[1]:.1f}x)  {abs(ours[2] - ref[2]):.0e}"
            )


def part_two() -> None:
    n = 50_000
    X, fair, _ = lifted_roll(n, seed=1)
    wanted = ["trustworthiness", "continuity", "rnx"]
    print(f"\n2. trustworthiness + continuity + rnx at k = 10, n = {n}, X 10-D, one call each")
    for label, curve in (("rnx at k = 10 only", 10), ("with the default R_NX curve", None)):
        extra = {} if curve is None else {"rnx_curve_max": curve}
        tic, cpu_tic = time.perf_counter(), time.process_time()
        scores = score_embedding(X, fair, metrics=wanted, ks=(10,), **extra)
        wall, cpu = time.perf_counter() - tic, time.process_time() - cpu_tic
        mode = "sampled" if scores.sample_size else "exact"
        grid = [k for name, k, _ in scores.values if name == "rnx"]
        print(f"   {label}: {wall:.1f} s wall, {cpu:.1f} s CPU (target 30 s); R_NX at K = {grid}")
    print(f"   T and C {mode} (sample_size = {scores.sample_size}); R_NX exact from the lists")
    for name in ("trustworthiness", "continuity"):
        se = scores.standard_errors.get((name, 10))
        print(f"   {name}(10) = {scores.get(name, 10):.5f} +- {se:.5f} (standard error)")
    print(f"   rnx(10) = {scores.get('rnx', 10):.5f}")
    for note in scores.notes:
        print(f"   note: {note}")


if __name__ == "__main__":
    part_one()
    part_two()
