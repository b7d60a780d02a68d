"""scikit-learn's manifold learners as peers: Isomap, the four LLE forms, t-SNE, SMACOF."""

from __future__ import annotations

from typing import Any, ClassVar

from lowdim._validation import NONE, RANDOM_STATE, Interval, Options
from lowdim.methods.peers._adapter import N_NEIGHBORS, OutOfSample, Peer

__all__ = [
    "IsomapEmbedding",
    "LLEEmbedding",
    "ModifiedLLEEmbedding",
    "HessianLLEEmbedding",
    "LTSAEmbedding",
    "TSNEEmbedding",
    "SmacofMDS",
]


class IsomapEmbedding(OutOfSample, Peer):
    """Isomap: geodesic distances on a neighbour graph, embedded by classical MDS.

    An adapter around ``sklearn.manifold.Isomap`` (Tenenbaum, de Silva & Langford 2000) with
    scikit-learn's parameters and defaults.

    Parameters
    ----------
    n_neighbors : int, default=5
        Neighbours per point in the graph, in [1, n_samples - 1].
    n_components : int, default=2
    eigen_solver : {"auto", "arpack", "dense"}, default="auto"
    path_method : {"auto", "FW", "D"}, default="auto"
        Floyd-Warshall or Dijkstra for the shortest paths.
    neighbors_algorithm : {"auto", "brute", "kd_tree", "ball_tree"}, default="auto"
    metric : str, default="minkowski"
    p : float, default=2
        The Minkowski power (2: Euclidean).
    n_jobs : int or None, default=None

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    estimator_ : sklearn.manifold.Isomap
        The fitted estimator (its ``dist_matrix_`` holds the n x n geodesic distances).
    n_features_in_ : int

    Notes
    -----
    scikit-learn's Isomap takes no ``random_state``: with ARPACK its start vector is drawn
    from the global generator, so two fits agree to the solver's tolerance, with column signs
    fixed by scikit-learn. A disconnected graph is joined by scikit-learn with a warning.

    References
    ----------
    .. [1] J. B. Tenenbaum, V. de Silva and J. C. Langford, "A global geometric framework for
       nonlinear dimensionality reduction", Science 290 (5500), 2319-2323, 2000.
       doi:10.1126/science.290.5500.2319
    """

    _underlying = ("sklearn.manifold", "Isomap")
    _reference = "Tenenbaum, de Silva & Langford, Science 290, 2000"
    _param_specs = {
        "n_neighbors": N_NEIGHBORS,
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "eigen_solver": [Options(("auto", "arpack", "dense"))],
    }
    compare_grid = {"n_neighbors": (5, 10, 30)}
    cost_tier = "fast"

    def __init__(
        self,
        *,
        n_neighbors: int = 5,
        n_components: int = 2,
        eigen_solver: str = "auto",
        path_method: str = "auto",
        neighbors_algorithm: str = "auto",
        metric: str = "minkowski",
        p: float = 2,
        n_jobs: int | None = None,
    ) -> None:
        self.n_neighbors = n_neighbors
        self.n_components = n_components
        self.eigen_solver = eigen_solver
        self.path_method = path_method
        self.neighbors_algorithm = neighbors_algorithm
        self.metric = metric
        self.p = p
        self.n_jobs = n_jobs


class _LocallyLinear(Peer):
    """The four forms of locally linear embedding share scikit-learn's one class."""

    _underlying = ("sklearn.manifold", "LocallyLinearEmbedding")
    _fitted = ("reconstruction_error_",)
    _param_specs = {
        "n_neighbors": N_NEIGHBORS,
        "n_components": [Interval(int, 1, "n_features")],
        "reg": [Interval(float, 0, None)],
        "eigen_solver": [NONE, Options(("auto", "arpack", "dense"))],
        "random_state": RANDOM_STATE,
    }
    compare_grid = {"n_neighbors": (10, 30)}
    # scikit-learn's ``method`` and the solver this form uses when ``eigen_solver`` is None
    _form: ClassVar[str]
    _solver: ClassVar[str] = "dense"

    def __init__(
        self,
        *,
        n_neighbors: int = 10,
        n_components: int = 2,
        reg: float = 1e-3,
        eigen_solver: str | None = None,
        tol: float = 1e-6,
        max_iter: int = 100,
        hessian_tol: float = 1e-4,
        modified_tol: float = 1e-12,
        neighbors_algorithm: str = "auto",
        random_state: Any = None,
        n_jobs: int | None = None,
    ) -> None:
        self.n_neighbors = n_neighbors
        self.n_components = n_components
        self.reg = reg
        self.eigen_solver = eigen_solver
        self.tol = tol
        self.max_iter = max_iter
        self.hessian_tol = hessian_tol
        self.modified_tol = modified_tol
        self.neighbors_algorithm = neighbors_algorithm
        self.random_state = random_state
        self.n_jobs = n_jobs

    @classmethod
    def _variant(cls) -> str:
        return f"(method={cls._form!r})"

    def _underlying_params(self) -> dict:
        params = self.get_params(deep=False)
        if params["eigen_solver"] is None:
            params["eigen_solver"] = self._solver
        return {**params, "method": self._form}

    def fit(self, X: Any, y: Any = None) -> _LocallyLinear:
        super().fit(X, y)
        self.eigen_solver_ = self.estimator_.eigen_solver
        return self


class LLEEmbedding(OutOfSample, _LocallyLinear):
    """Locally linear embedding: each point rebuilt from its neighbours, the weights kept.

    An adapter around scikit-learn's ``LocallyLinearEmbedding(method="standard")`` (Roweis &
    Saul 2000). The other forms (:class:`ModifiedLLEEmbedding`, :class:`HessianLLEEmbedding`,
    :class:`LTSAEmbedding`) take the same parameters and keep the same attributes.

    Parameters
    ----------
    n_neighbors : int, default=10
        Neighbours per point, from ``min_neighbors(n_components)`` to n_samples - 1.
        scikit-learn's default of 5 is too few for Hessian LLE in two dimensions, so every
        form starts at 10.
    n_components : int, default=2
        At most the number of features.
    reg : float, default=1e-3
        Regularisation of the local Gram matrices.
    eigen_solver : {None, "auto", "arpack", "dense"}, default=None
        None is the form's own choice: scikit-learn's "auto" (ARPACK above 200 points) for
        standard LLE, "dense" for the other three, where ARPACK's shift-invert stops on a
        singular matrix on noisy data (Hessian, LTSA) or is slower (modified: 6.3 s against
        0.6 s on a 700 x 50 table).
    tol, max_iter, hessian_tol, modified_tol, neighbors_algorithm, n_jobs
        scikit-learn's, passed unchanged.
    random_state : int, RandomState or None, default=None
        ARPACK's start vector.

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    reconstruction_error_ : float
    eigen_solver_ : str
        The solver used.
    estimator_ : sklearn.manifold.LocallyLinearEmbedding
    n_features_in_ : int

    Notes
    -----
    ``transform`` is scikit-learn's, LLE's own extension to new points (Saul & Roweis 2003):
    a new point's barycentric weights on its nearest training points, applied to their
    coordinates. The other three forms have no ``transform``: that rule is not theirs.

    References
    ----------
    .. [1] S. T. Roweis and L. K. Saul, "Nonlinear dimensionality reduction by locally linear
       embedding", Science 290 (5500), 2323-2326, 2000. doi:10.1126/science.290.5500.2323
    .. [2] L. K. Saul and S. T. Roweis, "Think globally, fit locally: unsupervised learning of
       low dimensional manifolds", Journal of Machine Learning Research 4, 119-155, 2003.
    """

    _form = "standard"
    _solver = "auto"
    _reference = "Roweis & Saul, Science 290, 2000"
    cost_tier = "fast"


class ModifiedLLEEmbedding(_LocallyLinear):
    """Modified LLE: several weight vectors per neighbourhood instead of one regularised one.

    An adapter around scikit-learn's ``LocallyLinearEmbedding(method="modified")`` (Zhang &
    Wang 2006); parameters and attributes as :class:`LLEEmbedding`, without ``transform``.
    Needs ``n_neighbors >= n_components``.

    References
    ----------
    .. [1] Z. Zhang and J. Wang, "MLLE: modified locally linear embedding using multiple
       weights", Advances in Neural Information Processing Systems 19, 1593-1600, 2006.
    """

    _form = "modified"
    _reference = "Zhang & Wang, NIPS 19, 2006"
    cost_tier = "fast"

    @classmethod
    def min_neighbors(cls, n_components: int) -> int:
        return n_components


class HessianLLEEmbedding(_LocallyLinear):
    """Hessian LLE (Hessian eigenmaps): the null space of local Hessian estimates.

    An adapter around scikit-learn's ``LocallyLinearEmbedding(method="hessian")`` (Donoho &
    Grimes 2003); parameters and attributes as :class:`LLEEmbedding`, without ``transform``.
    Needs more neighbours than the n_components * (n_components + 3) / 2 terms of the local
    quadratic fit.

    References
    ----------
    .. [1] D. L. Donoho and C. Grimes, "Hessian eigenmaps: locally linear embedding techniques
       for high-dimensional data", PNAS 100 (10), 5591-5596, 2003. doi:10.1073/pnas.1031596100
    """

    _form = "hessian"
    _reference = "Donoho & Grimes, PNAS 100, 2003"
    cost_tier = "fast"

    @classmethod
    def min_neighbors(cls, n_components: int) -> int:
        return n_components * (n_components + 3) // 2 + 1


class LTSAEmbedding(_LocallyLinear):
    """Local tangent space alignment: local tangent coordinates aligned into one chart.

    An adapter around scikit-learn's ``LocallyLinearEmbedding(method="ltsa")`` (Zhang & Zha
    2004); parameters and attributes as :class:`LLEEmbedding`, without ``transform``. Needs
    ``n_neighbors > n_components``: a neighbourhood larger than the tangent space fitted to
    it.

    References
    ----------
    .. [1] Z. Zhang and H. Zha, "Principal manifolds and nonlinear dimensionality reduction via
       tangent space alignment", SIAM J. Sci. Comput. 26 (1), 313-338, 2004.
       doi:10.1137/S1064827502419154
    """

    _form = "ltsa"
    _reference = "Zhang & Zha, SIAM J. Sci. Comput. 26, 2004"
    cost_tier = "fast"

    @classmethod
    def min_neighbors(cls, n_components: int) -> int:
        return n_components + 1


class TSNEEmbedding(Peer):
    """t-SNE: neighbour probabilities matched by a heavy-tailed map (Barnes-Hut by default).

    An adapter around ``sklearn.manifold.TSNE`` (van der Maaten & Hinton 2008) with
    scikit-learn's defaults. It has no ``transform``: t-SNE places only the points it was
    fitted on.

    Parameters
    ----------
    n_components : int, default=2
        Below 4 for the Barnes-Hut method.
    perplexity : float, default=30.0
        The effective number of neighbours, in (0, n_samples).
    early_exaggeration : float, default=12.0
    learning_rate : float or "auto", default="auto"
    max_iter : int, default=1000
        At least 250.
    metric : str, default="euclidean"
    init : {"pca", "random"}, default="pca"
    method : {"barnes_hut", "exact"}, default="barnes_hut"
    angle : float, default=0.5
        The Barnes-Hut trade-off, in [0, 1].
    random_state : int, RandomState or None, default=None
    n_jobs : int or None, default=None

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    kl_divergence_ : float
    n_iter_ : int
    estimator_ : sklearn.manifold.TSNE
    n_features_in_ : int

    References
    ----------
    .. [1] L. van der Maaten and G. Hinton, "Visualizing data using t-SNE", Journal of
       Machine Learning Research 9, 2579-2605, 2008.
    .. [2] L. van der Maaten, "Accelerating t-SNE using tree-based algorithms", Journal of
       Machine Learning Research 15, 3221-3245, 2014.
    """

    _underlying = ("sklearn.manifold", "TSNE")
    _fitted = ("kl_divergence_", "n_iter_")
    _reference = "van der Maaten & Hinton, JMLR 9, 2008"
    _param_specs = {
        "n_components": [Interval(int, 1, None)],
        "perplexity": [Interval(float, 0, "n_samples", closed="neither")],
        "early_exaggeration": [Interval(float, 1, None)],
        "learning_rate": [Options(("auto",)), Interval(float, 0, None, closed="neither")],
        "max_iter": [Interval(int, 250, None)],
        "init": [Options(("pca", "random"))],
        "method": [Options(("barnes_hut", "exact"))],
        "angle": [Interval(float, 0, 1)],
        "random_state": RANDOM_STATE,
    }
    compare_grid = {"perplexity": (10, 30, 50)}
    cost_tier = "slow"

    def __init__(
        self,
        *,
        n_components: int = 2,
        perplexity: float = 30.0,
        early_exaggeration: float = 12.0,
        learning_rate: float | str = "auto",
        max_iter: int = 1000,
        metric: str = "euclidean",
        init: str = "pca",
        method: str = "barnes_hut",
        angle: float = 0.5,
        random_state: Any = None,
        n_jobs: int | None = None,
    ) -> None:
        self.n_components = n_components
        self.perplexity = perplexity
        self.early_exaggeration = early_exaggeration
        self.learning_rate = learning_rate
        self.max_iter = max_iter
        self.metric = metric
        self.init = init
        self.method = method
        self.angle = angle
        self.random_state = random_state
        self.n_jobs = n_jobs


class SmacofMDS(Peer):
    """Metric MDS by SMACOF: stress majorization from a classical MDS start.

    An adapter around ``sklearn.manifold.MDS(metric_mds=True)`` on Euclidean distances (de
    Leeuw 1977). It starts from classical MDS (``init="classical_mds"``, the default that
    scikit-learn announces for version 1.10; its current default warns), so a fit is
    deterministic; ``init="random"`` with ``n_init`` starts uses ``random_state``. It has no
    ``transform``: SMACOF places only the points it was fitted on. Needs scikit-learn >= 1.8.

    Parameters
    ----------
    n_components : int, default=2
    init : {"classical_mds", "random"}, default="classical_mds"
    n_init : int, default=1
        Random starts (ignored for the classical MDS start).
    max_iter : int, default=300
    eps : float, default=1e-6
        Convergence tolerance on the relative stress.
    random_state : int, RandomState or None, default=None
    n_jobs : int or None, default=None

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    stress_ : float
    n_iter_ : int
    estimator_ : sklearn.manifold.MDS
        The fitted estimator (its ``dissimilarity_matrix_`` holds the n x n distances).
    n_features_in_ : int

    References
    ----------
    .. [1] J. de Leeuw, "Applications of convex analysis to multidimensional scaling", in
       Recent Developments in Statistics, 133-145, North-Holland, 1977.
    .. [2] I. Borg and P. J. F. Groenen, Modern Multidimensional Scaling, 2nd ed., Springer,
       2005, ch. 8.
    """

    _underlying = ("sklearn.manifold", "MDS")
    _min_version = (1, 8)
    _fitted = ("stress_", "n_iter_")
    _reference = "de Leeuw 1977; Borg & Groenen, Modern Multidimensional Scaling, 2005"
    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "init": [Options(("classical_mds", "random"))],
        "n_init": [Interval(int, 1, None)],
        "max_iter": [Interval(int, 1, None)],
        "eps": [Interval(float, 0, None, closed="neither")],
        "random_state": RANDOM_STATE,
    }
    cost_tier = "fast"

    def __init__(
        self,
        *,
        n_components: int = 2,
        init: str = "classical_mds",
        n_init: int = 1,
        max_iter: int = 300,
        eps: float = 1e-6,
        random_state: Any = None,
        n_jobs: int | None = None,
    ) -> None:
        self.n_components = n_components
        self.init = init
        self.n_init = n_init
        self.max_iter = max_iter
        self.eps = eps
        self.random_state = random_state
        self.n_jobs = n_jobs

    @classmethod
    def _variant(cls) -> str:
        return "(metric_mds=True)"

    def _underlying_params(self) -> dict:
        return {**self.get_params(deep=False), "metric_mds": True, "metric": "euclidean"}
