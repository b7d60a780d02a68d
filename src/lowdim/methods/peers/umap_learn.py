"""UMAP from the optional ``umap-learn`` package as a peer (``pip install 'lowdim[peers]'``)."""

from __future__ import annotations

from typing import Any

from lowdim._validation import NONE, RANDOM_STATE, Interval, Options
from lowdim.methods.peers._adapter import OutOfSample, Peer

__all__ = ["UMAPEmbedding"]


class UMAPEmbedding(OutOfSample, Peer):
    """UMAP: a fuzzy neighbour graph laid out by stochastic gradient descent.

    An adapter around ``umap.UMAP`` from the optional ``umap-learn`` package (McInnes, Healy
    & Melville 2018), installed by ``pip install 'lowdim[peers]'``. Its defaults are
    umap-learn's except ``n_jobs=1``: umap-learn runs one thread whenever ``random_state`` is
    set, and warns unless asked for one.

    Parameters
    ----------
    n_neighbors : int, default=15
        In [2, n_samples - 1].
    n_components : int, default=2
    metric : str, default="euclidean"
    min_dist : float, default=0.1
    spread : float, default=1.0
    n_epochs : int or None, default=None
        None: 500 epochs up to 10,000 points, 200 above (umap-learn's rule).
    learning_rate : float, default=1.0
    init : {"spectral", "random", "pca", "tswspectral"}, default="spectral"
    random_state : int, RandomState or None, default=None
    n_jobs : int, default=1

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    estimator_ : umap.UMAP
    n_features_in_ : int

    Notes
    -----
    umap-learn compiles its numba kernels in each new process the first time it fits, which
    costs far more than a fit on a few thousand points (``benchmarks/peers_cost.py``).

    References
    ----------
    .. [1] L. McInnes, J. Healy and J. Melville, "UMAP: uniform manifold approximation and
       projection for dimension reduction", arXiv:1802.03426, 2018.
    """

    _underlying = ("umap", "UMAP")
    _package = "umap-learn"
    _install = "pip install 'lowdim[peers]'"
    _reference = "McInnes, Healy & Melville, arXiv:1802.03426, 2018"
    _param_specs = {
        "n_neighbors": [Interval(int, 2, "n_samples - 1")],
        "n_components": [Interval(int, 1, "n_samples - 2")],
        "min_dist": [Interval(float, 0, None)],
        "spread": [Interval(float, 0, None, closed="neither")],
        "n_epochs": [NONE, Interval(int, 1, None)],
        "learning_rate": [Interval(float, 0, None, closed="neither")],
        "init": [Options(("spectral", "random", "pca", "tswspectral"))],
        "random_state": RANDOM_STATE,
    }
    compare_grid = {"n_neighbors": (5, 15, 50)}
    cost_tier = "slow"

    def __init__(
        self,
        *,
        n_neighbors: int = 15,
        n_components: int = 2,
        metric: str = "euclidean",
        min_dist: float = 0.1,
        spread: float = 1.0,
        n_epochs: int | None = None,
        learning_rate: float = 1.0,
        init: str = "spectral",
        random_state: Any = None,
        n_jobs: int = 1,
    ) -> None:
        self.n_neighbors = n_neighbors
        self.n_components = n_components
        self.metric = metric
        self.min_dist = min_dist
        self.spread = spread
        self.n_epochs = n_epochs
        self.learning_rate = learning_rate
        self.init = init
        self.random_state = random_state
        self.n_jobs = n_jobs
