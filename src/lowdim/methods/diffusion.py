"""Diffusion maps (Coifman & Lafon 2006) with a dense or a kNN-sparse Gaussian kernel."""

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
from lowdim.methods._eigen import (
    LAPLACIAN_SOLVERS,
    fix_signs,
    smallest_laplacian_eigenpairs,
    top_eigenpairs,
)
from lowdim.methods._graphs import (
    ON_DISCONNECTED,
    edge_rows,
    fit_by_policy,
    knn_distance_graph,
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
    squared_distances,
)

__all__ = ["DiffusionMaps", "DENSE_KERNEL_LIMIT"]

# A dense kernel holds n x n float64 values (200 MB at 5,000 points); above, use n_neighbors.
DENSE_KERNEL_LIMIT = 5000
_BLOCK_ENTRIES = 2_000_000


class DiffusionMaps(TransformerMixin, BaseEstimator):
    """Diffusion maps: the leading eigenvectors of a density-normalized Markov kernel.

    With a Gaussian kernel k, q = K 1, the density normalization K_alpha = Q^-alpha K Q^-alpha,
    its degrees d = K_alpha 1 and the Markov matrix P = D^-1 K_alpha, the coordinates at time
    t are (lambda_l^t psi_l(x)), l = 1 .. n_components, for the right eigenvectors psi_l of P
    (Coifman & Lafon 2006). They come from the symmetric conjugate
    S = D^-1/2 K_alpha D^-1/2 = V Lambda V^T as psi = D^-1/2 V; psi_0 is constant and dropped.

    Parameters
    ----------
    n_components : int, default=2
        Dimension of the embedding, in [1, n_samples - 1].
    n_neighbors : int or None, default=None
        None: the dense kernel over all pairs, the textbook form, allowed up to 5,000 points
        (an n x n array). An int in [1, n_samples - 1]: the kernel is kept on the symmetrised
        kNN graph (an edge when either point is among the other's nearest) plus each point
        itself, sparse, for large data.
    bandwidth : float or str, default="median"
        The kernel scale sigma in exp(-d^2 / (2 sigma^2)) (Coifman & Lafon's epsilon is
        2 sigma^2): a positive number, ``"median"``, ``"local"`` / ``"local:K"`` (per-point
        scales, kernel exp(-d^2 / (2 sigma_i sigma_j)); ``"local"`` is K = 7, or
        n_samples - 1 for fewer than 8 points) or ``"kernel_sum"``.
    alpha : float, default=1.0
        The density normalization in [0, 1]: 0 gives the normalized graph Laplacian, 1/2 the
        Fokker-Planck operator, 1 the Laplace-Beltrami operator, independent of the sampling
        density (Coifman & Lafon 2006; Nadler et al. 2006).
    diffusion_time : int, default=1
        The number of diffusion steps t >= 0; the coordinates are lambda_l^t psi_l.
    on_disconnected : {"warn", "raise", "largest"}, default="warn"
        What a kernel graph with several connected components does (see
        :class:`lowdim.methods.LaplacianEigenmaps`): warn and embed, raise, or fit on the
        largest component and place the other points (``excluded_``) by the out-of-sample
        extension, so ``embedding_`` keeps one finite row per input point.
    eigen_solver : {"auto", "amg", "arpack", "dense"}, default="auto"
        For the sparse kernel: where the Laplacian solver chain on I - S starts (AMG-LOBPCG,
        then shift-invert ARPACK, then dense; ``"auto"`` is dense up to 600 points). For the
        dense kernel: ``"arpack"`` uses Lanczos on S, anything else LAPACK's ``eigh`` for
        n <= 600 and Lanczos above.
    coordinates : {"leading", "independent"}, default="leading"
        ``"leading"`` keeps the ``n_components`` eigenvectors of largest eigenvalue below 1.
        ``"independent"`` computes the first m = min(4 x n_components, n_samples - 1) and
        keeps the ``n_components`` of positive eigenvalue that are least a function of the
        earlier ones (largest ``eigen_residuals_``; the first is always kept), in eigenvalue
        order [3]_.
    random_state : int, RandomState or None, default=None
        Seeds the eigen-solver's start vectors and the bandwidth rules' samples.
    n_jobs : int or None, default=None
        Parallel workers for the neighbour searches (None: one, -1: every core).

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
        lambda_l^t psi_l at the training points, signs fixed (largest-magnitude entry
        positive); psi is scaled so that psi_0 = 1, i.e. sum_i pi_i psi_l(x_i)^2 = 1 with the
        stationary distribution pi = d / sum(d).
    eigenvalues_ : ndarray of shape (n_components,)
        The Markov eigenvalues lambda_1 >= lambda_2 >= ... of the kept coordinates.
    eigen_residuals_ : ndarray of shape (m,)
        For each examined eigenvector (the n_components leading ones, or the first m with
        ``coordinates="independent"``), the residual of Dsilva et al. [3]_ of its local
        linear fit on the earlier ones: near 0 for a harmonic, near 1 for a new direction;
        the first is 1 by convention (see :mod:`lowdim.methods._harmonics`).
    eigenvector_indices_ : ndarray of int of shape (n_components,)
        Which examined eigenvectors are the coordinates (0 = psi_1).
    n_components_ : int
    bandwidth_ : float
        The sigma used (the median of the per-point scales for a local rule).
    bandwidth_rule_ : str
    solver_ : str
        ``"amg"``, ``"arpack"`` or ``"dense"``.
    n_connected_components_ : int
    excluded_ : ndarray of int
        Points outside the embedded component (``on_disconnected="largest"``), else empty.
    n_features_in_ : int

    See Also
    --------
    lowdim.methods.LaplacianEigenmaps : alpha = 0 and t = 0 give its random-walk
        eigenvectors, up to scale, on the same kernel graph.

    Notes
    -----
    ``transform`` is the Nyström extension psi_l(x) = (1/lambda_l) sum_j P(x, x_j) psi_l(x_j)
    with P(x, x_j) = k(x, x_j) q_j^-alpha / sum_i k(x, x_i) q_i^-alpha (the new point's own
    q(x)^-alpha cancels); for the sparse kernel a new point's edges follow the training rule
    (see :func:`lowdim.methods._graphs.query_distance_graph`), for each kept coordinate. It
    reproduces the training coordinates on the training points up to the eigen-solver's
    residual: to a few times 1e-7 of the largest coordinate (the sparse kernel's AMG-LOBPCG is
    run to a residual of 1e-7 for that reason; Lanczos and the dense solver go further).

    References
    ----------
    .. [1] R. R. Coifman and S. Lafon, "Diffusion maps", Applied and Computational Harmonic
       Analysis 21 (2006), 5-30. https://doi.org/10.1016/j.acha.2006.04.006
    .. [2] B. Nadler, S. Lafon, R. R. Coifman and I. G. Kevrekidis, "Diffusion maps, spectral
       clustering and reaction coordinates of dynamical systems", Applied and Computational
       Harmonic Analysis 21 (2006), 113-127. https://doi.org/10.1016/j.acha.2005.07.004
    .. [3] C. J. Dsilva, R. Talmon, R. R. Coifman and I. G. Kevrekidis, "Parsimonious
       representation of nonlinear dynamical systems through manifold learning: a chemotaxis
       case study", Applied and Computational Harmonic Analysis 44 (2018), 759-773.
       https://doi.org/10.1016/j.acha.2015.06.008

    Examples
    --------
    >>> import numpy as np
    >>> from lowdim.methods import DiffusionMaps
    >>> theta = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    >>> X = np.c_[np.cos(theta), np.sin(theta)]
    >>> DiffusionMaps(n_components=2, bandwidth=0.2).fit_transform(X).shape
    (200, 2)
    """

    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "n_neighbors": [NONE, Interval(int, 1, "n_samples - 1")],
        "bandwidth": BANDWIDTH_SPECS,
        "alpha": [Interval(float, 0, 1)],
        "diffusion_time": [Interval(int, 0, None)],
        "on_disconnected": [Options(ON_DISCONNECTED)],
        "eigen_solver": [Options(LAPLACIAN_SOLVERS)],
        "coordinates": [Options(COORDINATES)],
        "random_state": RANDOM_STATE,
        "n_jobs": [NONE, Interval(int, -1, None)],
    }
    _reference = "Coifman & Lafon, Applied and Computational Harmonic Analysis 21, 2006"

    def __init__(
        self,
        *,
        n_components: int = 2,
        n_neighbors: int | None = None,
        bandwidth: float | str = "median",
        alpha: float = 1.0,
        diffusion_time: int = 1,
        on_disconnected: str = "warn",
        eigen_solver: str = "auto",
        coordinates: str = "leading",
        random_state=None,
        n_jobs: int | None = None,
    ):
        self.n_components = n_components
        self.n_neighbors = n_neighbors
        self.bandwidth = bandwidth
        self.alpha = alpha
        self.diffusion_time = diffusion_time
        self.on_disconnected = on_disconnected
        self.eigen_solver = eigen_solver
        self.coordinates = coordinates
        self.random_state = random_state
        self.n_jobs = n_jobs

    # -- fitting -------------------------------------------------------------------------

    def _kernel(self, X: np.ndarray, rng: np.random.RandomState):
        """Kernel matrix K (self pairs included), the kNN graph (or None) and the bandwidth."""
        owner = type(self).__name__
        n = X.shape[0]
        rule = local_rule_for(self.bandwidth, n)
        if self.n_neighbors is None:
            bw = resolve_bandwidth(rule, X, random_state=rng, owner=owner)
            K = rbf_from_distances(squared_distances(X), bw, check_owner=owner)
            return K, None, bw
        graph = knn_distance_graph(X, int(self.n_neighbors), n_jobs=self.n_jobs)
        D = graph.distances
        knn = D.data.reshape(n, -1)
        bw = resolve_bandwidth(rule, X, random_state=rng, knn_distances=knn, owner=owner)
        values = rbf_from_distances(D.data**2, bw, edge_rows(D), D.indices, check_owner=owner)
        W = symmetrize(scipy.sparse.csr_matrix((values, D.indices, D.indptr), shape=D.shape))
        return W + scipy.sparse.identity(n, format="csr"), graph, bw

    def fit(self, X, y=None):
        """Build the kernel on ``X`` and compute its diffusion map.

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
        if self.n_neighbors is None and n > DENSE_KERNEL_LIMIT:
            raise InputError(
                f"the parameter `n_neighbors` of `{owner}` is None (a dense n x n kernel), "
                f"which is limited to n_samples <= {DENSE_KERNEL_LIMIT}, got n_samples={n}; "
                "set n_neighbors (for example 15) for a sparse kNN kernel"
            )
        rng = check_random_state(self.random_state)
        K, graph, bw = self._kernel(X, rng)
        hint = "raise `bandwidth`" + ("" if graph is None else " or `n_neighbors`")
        self.n_connected_components_, self.excluded_, self.embedding_ = fit_by_policy(
            X,
            scipy.sparse.csr_matrix(K),
            (K, graph, bw),
            policy=self.on_disconnected.lower(),
            owner=owner,
            hint=hint,
            n_components=self.n_components,
            build=lambda Z: self._kernel(Z, rng),
            solve=lambda Z, built: self._solve(Z, *built, rng),
            extend=self._extend,
            graph_name="kernel graph",
            too_few_fix="raise `bandwidth` or `n_neighbors`, or lower `n_components`",
        )
        return self

    def _solve(self, X_fit, K, graph, bw, rng) -> np.ndarray:
        alpha = float(self.alpha)
        m = self.n_components
        coordinates = self.coordinates.lower()
        examined = examined_count(coordinates, m, X_fit.shape[0] - 1)
        q = np.asarray(K.sum(axis=1)).ravel()
        scale = q**-alpha
        if graph is None:
            K_alpha = K * np.multiply.outer(scale, scale)
        else:
            K_alpha = scipy.sparse.diags(scale) @ K @ scipy.sparse.diags(scale)
        d = np.asarray(K_alpha.sum(axis=1)).ravel()
        root = np.sqrt(d)
        if graph is None:
            S = K_alpha / np.multiply.outer(root, root)
            solver = "arpack" if self.eigen_solver.lower() == "arpack" else "auto"
            result = top_eigenpairs(S, examined + 1, solver=solver, random_state=rng)
            values, vectors, used = result.values, result.vectors, result.solver
        else:
            S = scipy.sparse.diags(1.0 / root) @ K_alpha @ scipy.sparse.diags(1.0 / root)
            L = scipy.sparse.identity(S.shape[0], format="csr") - S
            result = smallest_laplacian_eigenpairs(
                L,
                examined + 1,
                null_vector=root,
                solver=self.eigen_solver.lower(),
                random_state=rng,
            )
            values, vectors, used = 1.0 - result.values, result.vectors, result.solver
        # psi = D^-1/2 V scaled so that psi_0 = 1: psi_l = v_l / v_0 with v_0 = sqrt(d)/|sqrt(d)|
        psi = vectors[:, 1:] * (np.linalg.norm(root) / root)[:, None]
        psi = fix_signs(np.ascontiguousarray(psi))
        keep, self.eigen_residuals_ = choose_coordinates(
            psi, coordinates, m, usable=values[1:] > 0, random_state=rng
        )
        psi = np.ascontiguousarray(psi[:, keep])
        self.eigenvector_indices_ = keep
        self.eigenvalues_ = values[1:][keep]
        self.n_components_ = m
        self.solver_ = used
        self.bandwidth_ = bw.sigma
        self.bandwidth_rule_ = bw.rule
        self.embedding_ = psi * self.eigenvalues_**self.diffusion_time
        self._psi = psi
        self._bw = bw
        self._graph = graph
        self._X_fit = X_fit
        self._log_q = np.log(q)
        return self.embedding_

    # -- out of sample -------------------------------------------------------------------

    def _extend(self, X: np.ndarray) -> np.ndarray:
        bw = self._bw
        scales = query_local_scales(self._X_fit, X, bw) if bw.local is not None else None
        alpha = float(self.alpha)
        if self._graph is None:
            average = np.empty((X.shape[0], self.n_components_))
            step = max(1, _BLOCK_ENTRIES // self._X_fit.shape[0])
            cols = np.arange(self._X_fit.shape[0])
            for start in range(0, X.shape[0], step):
                block = slice(start, start + step)
                sq = squared_distances(X[block], self._X_fit)
                if bw.local is None:
                    logw = sq * (-0.5 / bw.sigma**2)
                else:
                    logw = -sq / (2.0 * np.multiply.outer(scales[block], bw.local[cols]))
                logw -= alpha * self._log_q
                logw -= logw.max(axis=1, keepdims=True)
                w = np.exp(logw)
                average[block] = (w @ self._psi) / w.sum(axis=1, keepdims=True)
        else:
            D = query_distance_graph(
                self._graph,
                X,
                "knn",
                include_self=True,
                fallback_neighbors=int(self.n_neighbors),
            )
            row_scales = None if scales is None else scales[edge_rows(D)]
            logw = log_weights(D.data**2, bw, D.indices, row_scales)
            logw -= alpha * self._log_q[D.indices]
            average, _ = row_average(D, logw, self._psi)
        return average * self.eigenvalues_ ** (self.diffusion_time - 1)

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
