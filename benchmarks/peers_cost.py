"""What each peer costs with its default settings, which sets its tier in ``lowdim compare``.

    python benchmarks/peers_cost.py [--repeat 3] [--n 700] [--features 50]

The table: a swiss roll (3 coordinates) turned into 50 dimensions by a random rotation, plus
Gaussian noise of standard deviation 0.5 in every dimension: structure and noise together,
700 rows. Each peer is fitted with its defaults (``random_state=0``, 2 components) on one
thread, as a ``compare`` job runs, and timed against the scikit-learn (or umap-learn) class it
adapts, built here with the same parameters, in the same run: the ratio shows what the
adapter adds. The tier rule (``lowdim.methods.peers.FAST_SECONDS``): a peer is "fast" when
the median fit takes at most that many seconds, else "slow"; the script prints the measured
tier beside the declared one. "grid" is one fit of each value of the peer's compare grid.
Three of lowdim's own methods are timed for scale.

umap-learn compiles its numba kernels in every new process; its first fit is timed in a fresh
interpreter (import included) and its later fits in this one, after a warm-up. Times are
medians of ``--repeat`` fits; the machine's load average is printed, since shared cores make
them noisy.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
import warnings
from collections.abc import Callable

import numpy as np
from threadpoolctl import threadpool_limits

from lowdim.methods import get_method
from lowdim.methods.peers import FAST_SECONDS, peer_names


def table(n: int, features: int, seed: int = 0) -> np.ndarray:
    """A swiss roll rotated into ``features`` dimensions, with noise in all of them."""
    rng = np.random.default_rng(seed)
    t = rng.uniform(1.5 * np.pi, 4.5 * np.pi, n)
    roll = np.column_stack([t * np.cos(t), rng.uniform(0, 20, n), t * np.sin(t)])
    rotation, _ = np.linalg.qr(rng.normal(size=(features, features)))
    return roll @ rotation[:3] + 0.5 * rng.normal(size=(n, features))


def reference(name: str, params: dict) -> object:
    """The class each peer adapts, built directly with the adapter's parameters."""
    import sklearn.manifold as manifold

    forms = {"lle": "standard", "lle_modified": "modified", "lle_hessian": "hessian"}
    if name == "isomap":
        return manifold.Isomap(**params)
    if name in forms or name == "ltsa":
        solver = params["eigen_solver"] or ("auto" if name == "lle" else "dense")
        method = forms.get(name, "ltsa")
        return manifold.LocallyLinearEmbedding(
            **{**params, "eigen_solver": solver, "method": method}
        )
    if name == "tsne":
        return manifold.TSNE(**params)
    if name == "smacof":
        return manifold.MDS(**params, metric_mds=True, metric="euclidean")
    if name == "umap":
        import umap

        return umap.UMAP(**params)
    raise KeyError(name)


def median_seconds(fit: Callable[[], object], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fit()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def umap_first_fit(n: int, features: int) -> float | None:
    """Seconds for import + first fit in a fresh interpreter (numba compiles its kernels)."""
    command = [sys.executable, __file__, "--umap-first-fit", "--n", str(n)]
    out = subprocess.run([*command, "--features", str(features)], capture_output=True, text=True)
    return float(out.stdout.split()[-1]) if out.returncode == 0 else None


def time_umap_first_fit(n: int, features: int) -> None:
    """What the fresh interpreter of :func:`umap_first_fit` runs."""
    start = time.perf_counter()
    from lowdim.methods.peers import UMAPEmbedding

    UMAPEmbedding(random_state=0).fit(table(n, features))
    print(time.perf_counter() - start)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--n", type=int, default=700)
    parser.add_argument("--features", type=int, default=50)
    parser.add_argument("--umap-first-fit", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.umap_first_fit:
        time_umap_first_fit(args.n, args.features)
        return
    X = table(args.n, args.features)
    print(
        f"{args.n} x {args.features} table, one thread, median of {args.repeat}; "
        f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores"
    )
    print(f"tier rule: fast when a default fit takes <= {FAST_SECONDS:.1f} s\n")
    print(
        f"  {'method':<20}{'lowdim':>9}{'reference':>11}{'ratio':>7}{'grid':>9}  tier (declared)"
    )
    warnings.simplefilter("ignore")
    sweep = {"fast": 0.0, "slow": 0.0}
    with threadpool_limits(limits=1):
        for name in ("pca", "laplacian_eigenmaps", "diffusion_maps"):
            model = get_method(name)(random_state=0)
            seconds = median_seconds(lambda m=model: m.fit_transform(X), args.repeat)
            print(f"  {name:<20}{seconds:8.2f}s")
        for name in peer_names():
            cls = get_method(name)
            if cls.unavailable():
                print(f"  {name:<20} left out: {cls.unavailable()}")
                continue
            adapter = cls(random_state=0) if "random_state" in cls().get_params() else cls()
            params = adapter.get_params()
            if name == "umap":
                adapter.fit(X[:60])  # compile numba's kernels before timing
            ours = median_seconds(lambda a=adapter: a.fit_transform(X), args.repeat)
            ref = reference(name, params)
            theirs = median_seconds(lambda r=ref: r.fit_transform(X), args.repeat)
            grid = 0.0
            for key, values in cls.compare_grid.items():
                for value in values:
                    model = cls(**{**params, key: value})
                    grid += median_seconds(lambda m=model: m.fit_transform(X), 1)
            sweep[cls.cost_tier] += grid if cls.compare_grid else ours
            tier = "fast" if ours <= FAST_SECONDS else "slow"
            mark = "" if tier == cls.cost_tier else "  <- differs from the declared tier"
            grid_text = f"{grid:8.2f}s" if cls.compare_grid else f"{ours:8.2f}s"
            print(
                f"  {name:<20}{ours:8.2f}s{theirs:10.2f}s{ours / theirs:7.2f}{grid_text}"
                f"  {tier} ({cls.cost_tier}){mark}"
            )
    print(
        f"\n  one fit of every grid value: fast peers {sweep['fast']:.1f} s, "
        f"slow peers {sweep['slow']:.1f} s (per resample and seed of a comparison)"
    )
    if get_method("umap").unavailable() is None:
        first = umap_first_fit(args.n, args.features)
        text = f"{first:.1f} s" if first is not None else "failed"
        print(f"  umap's first fit in a new process, import included: {text}")
    print(f"\nload average at the end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
