"""Laplacian eigenmaps (Belkin & Niyogi 2003) on a sparse neighbour graph."""

from __future__ import annotations

import numpy as np
import scipy.sparse
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from lowdim._validation import (
    NONE,
    RANDOM_STATE,
    Interval,
    Options,
    check_params,
    validate_input,
)
from lowdim.errors import InputError
from lowdim.methods._eigen import LAPLACIAN_SOLVERS, fix_signs, smallest_laplacian_eigenpairs
from lowdim.methods._graphs import (
    GRAPHS,
    NORMALIZATIONS,
    ON_DISCONNECTED,
    DistanceGraph,
    default_neighbors,
    edge_rows,
    epsilon_distance_graph,
    fit_by_policy,
    knn_distance_graph,
    laplacian,
    local_rule_for,
    log_weights,
    query_distance_graph,
    row_average,
    symmetrize,
)
from lowdim.methods._harmonics import COORDINATES, choose_coordinates, examined_count
from lowdim.methods._kernels import (
    BANDWIDTH_SPECS,
    query_local_scales,
    rbf_from_distances,
    resolve_bandwidth,
)

__all__ = ["LaplacianEigenmaps"]


class LaplacianEigenmaps(TransformerMixin, BaseEstimator):
    """Laplacian eigenmaps: the low eigenvectors of a neighbour graph's Laplacian.

    A sparse neighbour graph joins each point to its neighbours, with heat-kernel or unit
    weights W; the embedding solves the generalized problem (D - W) f = lambda D f (or one of
    its relatives, see ``normalization``), drops the constant solution and keeps the next
    ``n_components`` (Belkin & Niyogi 2003).

    Parameters
    ----------
    n_components : int, default=2
        Dimension of the embedding, in [1, n_samples - 1].
    graph : {"knn", "mutual_knn", "epsilon"}, default="knn"
        ``"knn"`` joins i and j when either is among the other's ``n_neighbors`` nearest;
        ``"mutual_knn"`` when both are; ``"epsilon"`` when they are closer than ``radius``.
    n_neighbors : int or None, default=None
        Neighbours per point, in [1, n_samples - 1]; None means min(10, n_samples - 1). For
        the epsilon graph it only serves new points that have no training point within
        ``radius`` (they are joined to that many nearest training points).
    radius : float or None, default=None
        The epsilon graph's radius; required for ``graph="epsilon"``, ignored otherwise.
    weights : {"heat", "binary"}, default="heat"
        Heat kernel weights exp(-d^2 / (2 sigma^2)) (Belkin & Niyogi's exp(-d^2 / t) with
        t = 2 sigma^2), or 1 on every edge.
    bandwidth : float or str, default="local"
        The heat kernel's sigma: a positive number, ``"median"``, ``"local"`` / ``"local:K"``
        (per-point scales from the K-th neighbour distance, read from the graph's kNN
        distances when K <= n_neighbors; ``"local"`` is K = 7, or n_samples - 1 for fewer than
        8 points) or ``"kernel_sum"``. Unused for binary weights.
    normalization : {"random_walk", "symmetric", "unnormalized"}, default="random_walk"
        ``"random_walk"``: (D - W) f = lambda D f, solved as the symmetric normalized
        Laplacian's eigenvectors divided by sqrt(degree); ``"symmetric"``: the eigenvectors of
        I - D^-1/2 W D^-1/2 themselves; ``"unnormalized"``: those of D - W.
    on_disconnected : {"warn", "raise", "largest"}, default="warn"
        What a graph with several connected components does. ``"warn"`` embeds it anyway (the
        leading coordinates then only label components) with a warning naming the component
        sizes; ``"raise"`` raises an InputError; ``"largest"`` fits on the largest component
        only: its points are embedded as usual, every other point (listed in ``excluded_``)
        gets the out-of-sample extension from its nearest points of that component, so
        ``embedding_`` keeps one finite row per input point.
    eigen_solver : {"auto", "amg", "arpack", "dense"}, default="auto"
        Where the solver chain starts (AMG-preconditioned LOBPCG, then shift-invert ARPACK,
        then dense for small n); ``"auto"`` is dense up to 600 points and AMG above.
    coordinates : {"leading", "independent"}, default="leading"
        ``"leading"`` embeds with the ``n_components`` eigenvectors of smallest non-zero
        eigenvalue. ``"independent"`` computes the first m = min(4 x n_components,
        n_samples - 1) and keeps the ``n_components`` that are least a function of the
        earlier ones (largest ``eigen_residuals_``; the first is always kept), in eigenvalue
        order: on a long thin sheet the leading ones are harmonics of its long side and
        draw a curve [3]_.
    random_state : int, RandomState or None, default=None
        Seeds the eigen-solver's start vectors and the bandwidth rules' samples.
    n_jobs : int or None, default=None
        Parallel workers for the neighbour searches (None: one, -1: every core).

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
        The training points' coordinates, signs fixed (largest-magnitude entry positive).
    eigenvalues_ : ndarray of shape (n_components,)
        The Laplacian eigenvalues of the kept coordinates, ascending (the 0 dropped).
    eigen_residuals_ : ndarray of shape (m,)
        For each examined eigenvector (the n_components leading ones, or the first m with
        ``coordinates="independent"``), the residual of Dsilva et al. [3]_ of its local
        linear fit on the earlier ones: near 0 for a harmonic, near 1 for a new direction;
        the first is 1 by convention (see :mod:`lowdim.methods._harmonics`).
    eigenvector_indices_ : ndarray of int of shape (n_components,)
        Which examined eigenvectors are the coordinates (0 = the first non-constant one).
    n_components_ : int
    n_neighbors_ : int
        The number of neighbours used.
    bandwidth_ : float or None
        The heat kernel's sigma (the median of the per-point scales for a local rule); None
        for binary weights.
    bandwidth_rule_ : str or None
        ``"value"`` for a number, else the rule used (e.g. ``"local:7"``).
    solver_ : str
        The eigen-solver that produced the result: ``"amg"``, ``"arpack"`` or ``"dense"``.
    n_connected_components_ : int
        Components of the graph on all training points.
    excluded_ : ndarray of int
        Indices of the points outside the embedded component (``on_disconnected="largest"``);
        empty otherwise.
    n_features_in_ : int

    See Also
    --------
    lowdim.methods.DiffusionMaps : the same graph idea with a density normalization and a
        diffusion time.

    Notes
    -----
    Everything is sparse: the graph has O(n k) entries and the solver never forms an n x n
    matrix (the dense solver is used only for n <= 600, or as the last resort up to 6000).
    ``transform`` is the Nyström extension of the eigen-equation: a new point x gets edges to
    the training points under the same graph rule, weights w_j, and

    - random_walk: f(x) = sum_j w_j f_j / ((1 - lambda) sum_j w_j);
    - symmetric: v(x) = sum_j w_j v_j / sqrt(d_j) / ((1 - lambda) sqrt(d_x));
    - unnormalized: f(x) = sum_j w_j f_j / (d_x - lambda), and the plain weighted average
      where d_x <= lambda (a point too weakly joined for the formula);

    for each kept eigenpair (lambda, f) (the chosen ones with ``coordinates="independent"``).
    On the training points these give the training coordinates back up to the eigen-solver's
    residual: exactly for the dense solver, to a few times 1e-7 of the largest coordinate for
    AMG-LOBPCG, which is run to a residual of 1e-7 for that reason.

    References
    ----------
    .. [1] M. Belkin and P. Niyogi, "Laplacian eigenmaps for dimensionality reduction and
       data representation", Neural Computation 15 (2003), 1373-1396.
       https://doi.org/10.1162/089976603321780317
    .. [2] U. von Luxburg, "A tutorial on spectral clustering", Statistics and Computing 17
       (2007), 395-416. https://doi.org/10.1007/s11222-007-9033-z
    .. [3] C. J. Dsilva, R. Talmon, R. R. Coifman and I. G. Kevrekidis, "Parsimonious
       representation of nonlinear dynamical systems through manifold learning: a chemotaxis
       case study", Applied and Computational Harmonic Analysis 44 (2018), 759-773.
       https://doi.org/10.1016/j.acha.2015.06.008

    Examples
    --------
    >>> import numpy as np
    >>> from lowdim.methods import LaplacianEigenmaps
    >>> t = np.linspace(0, 3 * np.pi, 300)
    >>> X = np.c_[t * np.cos(t), t * np.sin(t), np.random.default_rng(0).uniform(size=300)]
    >>> LaplacianEigenmaps(n_components=2, random_state=0).fit_transform(X).shape
    (300, 2)
    """

    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "graph": [Options(GRAPHS)],
        "n_neighbors": [NONE, Interval(int, 1, "n_samples - 1")],
        "radius": [NONE, Interval(float, 0, None, closed="neither")],
        "weights": [Options(("heat", "binary"))],
        "bandwidth": BANDWIDTH_SPECS,
        "normalization": [Options(NORMALIZATIONS)],
        "on_disconnected": [Options(ON_DISCONNECTED)],
        "eigen_solver": [Options(LAPLACIAN_SOLVERS)],
        "coordinates": [Options(COORDINATES)],
        "random_state": RANDOM_STATE,
        "n_jobs": [NONE, Interval(int, -1, None)],
    }
    _reference = "Belkin & Niyogi, Neural Computation 15, 2003"

    def __init__(
        self,
        *,
        n_components: int = 2,
        graph: str = "knn",
        n_neighbors: int | None = None,
        radius: float | None = None,
        weights: str = "heat",
        bandwidth: float | str = "local",
        normalization: str = "random_walk",
        on_disconnected: str = "warn",
        eigen_solver: str = "auto",
        coordinates: str = "leading",
        random_state=None,
        n_jobs: int | None = None,
    ):
        self.n_components = n_components
        self.graph = graph
        self.n_neighbors = n_neighbors
        self.radius = radius
        self.weights = weights
        self.bandwidth = bandwidth
        self.normalization = normalization
        self.on_disconnected = on_disconnected
        self.eigen_solver = eigen_solver
        self.coordinates = coordinates
        self.random_state = random_state
        self.n_jobs = n_jobs

    # -- fitting -------------------------------------------------------------------------

    def _graph_kind(self) -> str:
        return self.graph.lower()

    def _build(self, X: np.ndarray, rng: np.random.RandomState):
        """Distance graph, bandwidth and symmetric weight matrix of the points ``X``."""
        owner = type(self).__name__
        n = X.shape[0]
        kind = self._graph_kind()
        if kind == "epsilon":
            graph = epsilon_distance_graph(X, float(self.radius), n_jobs=self.n_jobs)
            knn = None
        else:
            graph = knn_distance_graph(X, min(self.n_neighbors_, n - 1), n_jobs=self.n_jobs)
            k = graph.distances.indptr[1]
            knn = graph.distances.data.reshape(n, k)
        D = graph.distances
        rows = edge_rows(D)
        if self.weights.lower() == "binary":
            bw = None
            values = np.ones(D.nnz)
        else:
            bw = resolve_bandwidth(
                local_rule_for(self.bandwidth, n),
                X,
                random_state=rng,
                knn_distances=knn,
                owner=owner,
            )
            values = rbf_from_distances(D.data**2, bw, rows, D.indices, check_owner=owner)
        W = scipy.sparse.csr_matrix((values, D.indices, D.indptr), shape=D.shape)
        W = symmetrize(W, "intersection" if kind == "mutual_knn" else "union")
        return graph, bw, W

    def _check_isolated(self, W) -> None:
        lonely = int(np.sum(np.diff(W.indptr) == 0))
        if lonely and self.on_disconnected != "largest":
            what = (
                f"within radius={self.radius!r}"
                if self._graph_kind() == "epsilon"
                else f"that is mutual among their n_neighbors={self.n_neighbors_} nearest"
            )
            raise InputError(
                f"{lonely} of {W.shape[0]} points have no neighbour {what} in the graph of "
                f"`{type(self).__name__}`, so they cannot be embedded; raise the parameter, "
                "or set on_disconnected='largest' to embed the largest component"
            )

    def fit(self, X, y=None):
        """Build the graph on ``X`` and compute its Laplacian eigenmap.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : ignored

        Returns
        -------
        self
        """
        X = validate_input(self, X, reset=True)
        n, p = X.shape
        check_params(self, n_samples=n, n_features=p)
        owner = type(self).__name__
        if self._graph_kind() == "epsilon" and self.radius is None:
            raise InputError(
                f"the parameter `radius` of `{owner}` must be a positive number when "
                "graph='epsilon', got None; give the radius of the neighbourhoods"
            )
        rng = check_random_state(self.random_state)
        self.n_neighbors_ = default_neighbors(self.n_neighbors, n)
        graph, bw, W = self._build(X, rng)
        self._check_isolated(W)
        policy = self.on_disconnected.lower()
        hint = "raise `radius`" if self._graph_kind() == "epsilon" else "raise `n_neighbors`"
        self.n_connected_components_, self.excluded_, self.embedding_ = fit_by_policy(
            X,
            W,
            (graph, bw, W),
            policy=policy,
            owner=owner,
            hint=hint,
            n_components=self.n_components,
            build=lambda Z: self._build(Z, rng),
            solve=lambda Z, built: self._solve(Z, *built, rng),
            extend=self._extend,
        )
        return self

    def _solve(self, X_fit, graph: DistanceGraph, bw, W, rng) -> np.ndarray:
        normalization = self.normalization.lower()
        L, degree, null = laplacian(W, normalization)
        m = self.n_components
        coordinates = self.coordinates.lower()
        examined = examined_count(coordinates, m, X_fit.shape[0] - 1)
        result = smallest_laplacian_eigenpairs(
            L, examined + 1, null_vector=null, solver=self.eigen_solver.lower(), random_state=rng
        )
        values, vectors = result.values[1:], result.vectors[:, 1:]
        if normalization == "random_walk":
            vectors = vectors / np.sqrt(degree)[:, None]
        vectors = fix_signs(np.ascontiguousarray(vectors))
        keep, self.eigen_residuals_ = choose_coordinates(vectors, coordinates, m, random_state=rng)
        self.eigenvector_indices_ = keep
        self.embedding_ = np.ascontiguousarray(vectors[:, keep])
        self.eigenvalues_ = values[keep]
        self.n_components_ = m
        self.solver_ = result.solver
        self.bandwidth_ = None if bw is None else bw.sigma
        self.bandwidth_rule_ = None if bw is None else bw.rule
        self._bw = bw
        self._graph = graph
        self._X_fit = X_fit
        self._degree = degree
        # Extension basis: the quantity averaged over a new point's neighbours.
        if normalization == "symmetric":
            self._basis = self.embedding_ / np.sqrt(degree)[:, None]
        else:
            self._basis = self.embedding_
        return self.embedding_

    # -- out of sample -------------------------------------------------------------------

    def _extend(self, X: np.ndarray) -> np.ndarray:
        D = query_distance_graph(
            self._graph, X, self._graph_kind(), fallback_neighbors=self.n_neighbors_
        )
        bw = self._bw
        if bw is None:
            logw = np.zeros(D.nnz)
        else:
            scales = None
            if bw.local is not None:
                scales = query_local_scales(self._X_fit, X, bw)[edge_rows(D)]
            logw = log_weights(D.data**2, bw, D.indices, scales)
        average, total = row_average(D, logw, self._basis)
        values = self.eigenvalues_
        normalization = self.normalization.lower()
        if normalization == "random_walk":
            return average / (1.0 - values)
        if normalization == "symmetric":
            return average * np.sqrt(total)[:, None] / (1.0 - values)
        total = total[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            exact = average * total / (total - values)
        return np.where(total > values, exact, average)

    def transform(self, X) -> np.ndarray:
        """Place new points by the Nyström extension (exact on the training points).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)

        Returns
        -------
        ndarray of shape (n_queries, n_components)
        """
        check_is_fitted(self, "embedding_")
        X = validate_input(self, X, reset=False, min_samples=1)
        return self._extend(X)

    def fit_transform(self, X, y=None) -> np.ndarray:
        """Fit on ``X`` and return ``embedding_``."""
        return self.fit(X).embedding_
