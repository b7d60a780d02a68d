"""Speed of the linear methods and kernel PCA, side by side with scikit-learn in one run.

    python benchmarks/methods_linear.py [--repeat 3] [--quick]

Targets (issue 2, section 4), each on the same data for both implementations:

- kernel_pca rbf, n = 4,000, 2 components: at most 0.7 x sklearn KernelPCA(eigen_solver="arpack");
- classical_mds, n = 4,000: at most 0.1 x sklearn.manifold.ClassicalMDS (feature input; the
  precomputed-distance route is timed as well);
- pca on 100,000 x 100: no slower than sklearn.decomposition.PCA.

Times are the best of ``--repeat`` runs, the two sides alternating so that a change in machine
load hits both (scikit-learn's ClassicalMDS, a full n x n eigendecomposition, runs once). The
OpenBLAS tuning variables some machines set for tests are removed first so that both sides run
with the library's own defaults.
"""

from __future__ import annotations

import os

for _name in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE"):
    os.environ.pop(_name, None)

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.spatial.distance import cdist  # noqa: E402
from sklearn.decomposition import PCA  # noqa: E402
from sklearn.decomposition import KernelPCA as SklearnKernelPCA  # noqa: E402
from sklearn.manifold import ClassicalMDS as SklearnClassicalMDS  # noqa: E402

from lowdim.methods.kernel_pca import KernelPCA  # noqa: E402
from lowdim.methods.linear import ClassicalMDS, PCAEmbedding  # noqa: E402


def _best_of(repeat: int, fn) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def _compare(repeat: int, ours, theirs) -> tuple[float, float]:
    """Best times of the two, run alternately so that a change in machine load hits both."""
    mine, other = [], []
    for _ in range(repeat):
        mine.append(_best_of(1, ours))
        other.append(_best_of(1, theirs))
    return min(mine), min(other)


def _row(name: str, ours: float, theirs: float, target: str) -> None:
    ratio = ours / theirs
    print(f"{name:<34} {ours:9.3f} s {theirs:9.3f} s {ratio:8.3f}x   {target}")


def _sensor_cloud(n: int, d: int, seed: int) -> np.ndarray:
    """Readings of a made-up sensor array: a few smooth drivers mixed into d channels."""
    rng = np.random.default_rng(seed)
    t = rng.uniform(0, 2 * np.pi, size=(n, 3))
    drivers = np.column_stack([np.sin(t[:, 0]), np.cos(t[:, 0]), t[:, 1], np.sin(2 * t[:, 2])])
    mixing = rng.normal(size=(drivers.shape[1], d))
    return drivers @ mixing + 0.05 * rng.normal(size=(n, d))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--quick", action="store_true", help="smaller sizes, for a smoke run")
    args = parser.parse_args()
    n_kernel = 1000 if args.quick else 4000
    n_pca = 20_000 if args.quick else 100_000
    print(f"{'case':<34} {'lowdim':>11} {'sklearn':>11} {'ratio':>9}   target")

    X = _sensor_cloud(n_kernel, 10, seed=0)
    sigma = float(np.median(cdist(X[:500], X[:500])))
    gamma = 1.0 / (2.0 * sigma**2)
    ours, theirs = _compare(
        args.repeat,
        lambda: KernelPCA(n_components=2, bandwidth=sigma, random_state=0).fit_transform(X),
        lambda: SklearnKernelPCA(
            n_components=2, kernel="rbf", gamma=gamma, eigen_solver="arpack", random_state=0
        ).fit_transform(X),
    )
    _row(f"kernel_pca rbf n={n_kernel}", ours, theirs, "<= 0.7x")

    ours = _best_of(args.repeat, lambda: ClassicalMDS(n_components=2).fit_transform(X))
    theirs = _best_of(1, lambda: SklearnClassicalMDS(n_components=2).fit_transform(X))
    _row(f"classical_mds features n={n_kernel}", ours, theirs, "<= 0.1x")
    D = cdist(X, X)
    ours = _best_of(
        args.repeat,
        lambda: ClassicalMDS(n_components=2, metric="precomputed", random_state=0).fit_transform(
            D
        ),
    )
    theirs = _best_of(
        1, lambda: SklearnClassicalMDS(n_components=2, metric="precomputed").fit_transform(D)
    )
    _row(f"classical_mds precomputed n={n_kernel}", ours, theirs, "<= 0.1x")

    Z = _sensor_cloud(n_pca, 100, seed=1)
    ours, theirs = _compare(
        args.repeat,
        lambda: PCAEmbedding(n_components=10).fit_transform(Z),
        lambda: PCA(n_components=10).fit_transform(Z),
    )
    _row(f"pca {n_pca} x 100", ours, theirs, "<= 1x")


if __name__ == "__main__":
    main()
