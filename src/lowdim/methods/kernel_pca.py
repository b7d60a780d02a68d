"""Kernel principal component analysis, exact or with a Nyström approximation."""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.linalg.blas
import scipy.sparse.linalg
from sklearn.base import BaseEstimator, ClassNamePrefixFeaturesOutMixin, TransformerMixin
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from lowdim._validation import (
    NONE,
    RANDOM_STATE,
    Interval,
    Options,
    check_params,
    check_symmetric,
    validate_input,
)
from lowdim.errors import InputError
from lowdim.methods._eigen import DENSE_LIMIT, top_eigenpairs
from lowdim.methods._harmonics import COORDINATES, choose_coordinates, examined_count
from lowdim.methods._kernels import (
    BANDWIDTH_SPECS,
    KERNELS,
    Bandwidth,
    cosine_kernel,
    laplacian_from_distances,
    linear_kernel,
    manhattan_distances,
    polynomial_kernel,
    query_local_scales,
    rbf_from_distances,
    rbf_kernel,
    rbf_kernel_upper,
    resolve_bandwidth,
    squared_distances,
    underflow_error,
)

__all__ = ["KernelPCA"]

# A centred spectrum whose most negative eigenvalue is below -NEGATIVE_TOLERANCE x the largest
# is not the rounding of a positive semi-definite kernel.
NEGATIVE_TOLERANCE = 1e-5
_BLOCK_ENTRIES = 4_000_000
# ARPACK's relative residual: on 4,000-point RBF kernels the eigenvectors still agree with a
# dense solve to ~1e-11, in 21 matrix-vector products against 38 at machine precision
ARPACK_TOL = 1e-8


def _centred_kernel_operator(K: np.ndarray) -> scipy.sparse.linalg.LinearOperator:
    """The doubly centred kernel J K J (J = I - 11^T / n) as a product, for Lanczos.

    BLAS ``dsymv`` reads only the entries ``K[i, j]`` with ``j >= i`` of the symmetric ``K``
    (the lower triangle of its Fortran-ordered transpose, no copy), so ``K`` may hold just that
    triangle. Reading one triangle halves the memory traffic of ``K @ v``; the centring costs
    O(n) per product instead of two passes over ``K``.
    """
    n = K.shape[0]
    K_fortran = K.T

    def product(v: np.ndarray) -> np.ndarray:
        u = np.ravel(v) - np.mean(v)
        w = scipy.linalg.blas.dsymv(1.0, K_fortran, u, lower=1)
        return w - w.mean()

    return scipy.sparse.linalg.LinearOperator((n, n), matvec=product, dtype=np.float64)


class KernelPCA(ClassNamePrefixFeaturesOutMixin, TransformerMixin, BaseEstimator):
    """Kernel principal component analysis: PCA in the feature space of a kernel.

    Parameters
    ----------
    n_components : int, default=2
        Number of components, in [1, n_samples - 1].
    kernel : {"rbf", "linear", "polynomial", "laplacian", "cosine", "precomputed"}, \
default="rbf"
        ``rbf``: exp(-|x - y|^2 / (2 sigma^2)); ``laplacian``: exp(-|x - y|_1 / sigma);
        ``polynomial``: (gamma x.y + coef0)^degree; ``cosine``: x.y / (|x| |y|);
        ``precomputed``: ``X`` is a square, symmetric, positive semi-definite kernel matrix
        (and ``transform`` takes the kernel between new and training points).
    bandwidth : float or str, default="median"
        sigma of the rbf and laplacian kernels: a positive number, ``"median"``, ``"local"``,
        ``"local:K"`` or ``"kernel_sum"`` (see :mod:`lowdim.methods._kernels`). The laplacian
        kernel measures its rules in L1 distances and does not take ``"kernel_sum"``.
    gamma : float or None, default=None
        scikit-learn's scale: exp(-gamma |x - y|^2) for rbf, exp(-gamma |x - y|_1) for
        laplacian, the coefficient of x.y for polynomial. When set, gamma wins over
        ``bandwidth``; for polynomial, None means 1 / n_features.
    degree : int, default=3
        Degree of the polynomial kernel.
    coef0 : float, default=1.0
        Constant of the polynomial kernel.
    n_landmarks : int or None, default=None
        Nyström approximation [2]_ on this many random landmarks: only the n x m kernel
        between all points and the landmarks is formed, never the n x n one.
    solver : {"auto", "dense", "arpack", "randomized"}, default="auto"
        Eigen-solver for the exact centred kernel
        (see :func:`lowdim.methods._eigen.top_eigenpairs`).
    coordinates : {"leading", "independent"}, default="leading"
        ``"leading"`` keeps the ``n_components`` components of largest eigenvalue.
        ``"independent"`` computes the first m = min(4 x n_components, n_samples - 1) (at
        most the landmark kernel's rank with ``n_landmarks``) and keeps the ``n_components``
        of positive eigenvalue that are least a function of the earlier ones (largest
        ``eigen_residuals_``; the first is always kept), in eigenvalue order [3]_.
    random_state : int, RandomState or None, default=None
        Seeds the landmarks, the eigen-solver's start and the bandwidth rules' samples.

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
        Scores of the training points, sqrt(mu) v.
    eigenvalues_ : ndarray of shape (n_components,)
        Eigenvalues mu of the centred kernel matrix of the kept components (tiny negatives from
        rounding set to 0).
    eigen_residuals_ : ndarray of shape (m,)
        For each examined eigenvector (the n_components leading ones, or the first m with
        ``coordinates="independent"``), the residual of Dsilva et al. [3]_ of its local
        linear fit on the earlier ones: near 0 for a harmonic, near 1 for a new direction;
        the first is 1 by convention (see :mod:`lowdim.methods._harmonics`).
    eigenvector_indices_ : ndarray of int of shape (n_components,)
        Which examined eigenvectors are the components (0 = the first).
    bandwidth_ : float or None
        sigma used by the rbf or laplacian kernel (the median of the per-point scales for a
        local rule; from gamma when gamma is set), None for the other kernels.
    bandwidth_rule_ : str or None
        ``"value"``, ``"gamma"``, ``"median"``, ``"local:K"`` or ``"kernel_sum"``.
    local_bandwidths_ : ndarray of shape (n_samples,) or None
        Per-point scales of a local rule.
    landmarks_ : ndarray of int or None
    n_components_ : int
    solver_ : str
    n_features_in_ : int

    Notes
    -----
    The kernel is centred in feature space, K~ = K - 1K - K1 + 1K1, and its top eigenpairs
    (mu, v) give the scores sqrt(mu) v [1]_. New points are centred with the training column
    means, their own row means and the training grand mean, then scored K~_t v / sqrt(mu),
    which gives the training scores back for training points. A kernel whose centred spectrum
    is significantly negative (not positive semi-definite) is an error.

    References
    ----------
    .. [1] B. Schölkopf, A. Smola and K.-R. Müller, "Nonlinear component analysis as a kernel
       eigenvalue problem", Neural Computation 10 (1998), 1299-1319.
       https://doi.org/10.1162/089976698300017467
    .. [2] C. K. I. Williams and M. Seeger, "Using the Nyström method to speed up kernel
       machines", Advances in Neural Information Processing Systems 13 (2001), 682-688.
    .. [3] C. J. Dsilva, R. Talmon, R. R. Coifman and I. G. Kevrekidis, "Parsimonious
       representation of nonlinear dynamical systems through manifold learning: a chemotaxis
       case study", Applied and Computational Harmonic Analysis 44 (2018), 759-773.
       https://doi.org/10.1016/j.acha.2015.06.008

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(0).normal(size=(80, 3))
    >>> KernelPCA(n_components=2, bandwidth=1.5).fit_transform(X).shape
    (80, 2)
    """

    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "kernel": [Options((*KERNELS, "precomputed"))],
        "bandwidth": BANDWIDTH_SPECS,
        "gamma": [NONE, Interval(float, 0, None, closed="neither")],
        "degree": [Interval(int, 1, None)],
        "coef0": [Interval(float, None, None)],
        "n_landmarks": [NONE, Interval(int, 2, "n_samples")],
        "solver": [Options(("auto", "dense", "arpack", "randomized"))],
        "coordinates": [Options(COORDINATES)],
        "random_state": RANDOM_STATE,
    }
    _reference = "Schölkopf, Smola & Müller, Neural Computation 10, 1998"

    def __init__(
        self,
        *,
        n_components=2,
        kernel="rbf",
        bandwidth="median",
        gamma=None,
        degree=3,
        coef0=1.0,
        n_landmarks=None,
        solver="auto",
        coordinates="leading",
        random_state=None,
    ):
        self.n_components = n_components
        self.kernel = kernel
        self.bandwidth = bandwidth
        self.gamma = gamma
        self.degree = degree
        self.coef0 = coef0
        self.n_landmarks = n_landmarks
        self.solver = solver
        self.coordinates = coordinates
        self.random_state = random_state

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.pairwise = str(self.kernel).lower() == "precomputed"
        return tags

    # -- kernel evaluation ---------------------------------------------------------------

    def _resolve_scale(self, X: np.ndarray, rng) -> None:
        name = self._kernel_name
        self._bw = None
        if name not in ("rbf", "laplacian"):
            self.bandwidth_ = self.bandwidth_rule_ = self.local_bandwidths_ = None
            return
        metric = "euclidean" if name == "rbf" else "manhattan"
        if self.gamma is not None:
            gamma = float(self.gamma)
            sigma = np.sqrt(0.5 / gamma) if name == "rbf" else 1.0 / gamma
            bw = Bandwidth(sigma=float(sigma), rule="gamma", metric=metric, gamma_value=gamma)
        else:
            bw = resolve_bandwidth(
                self.bandwidth,
                X,
                random_state=rng,
                owner=type(self).__name__,
                metric=metric,
            )
        self._bw = bw
        self.bandwidth_ = bw.sigma
        self.bandwidth_rule_ = bw.rule
        self.local_bandwidths_ = bw.local

    def _kernel_block(self, A, B, rows=None, cols=None, *, new=False, check=False):
        """Kernel between rows ``A`` and columns ``B`` (training points ``cols``).

        ``rows`` indexes the training points of ``A`` (for local scales and the underflow
        check); ``new`` marks ``A`` as new points, whose local scales are searched for.
        """
        name = self._kernel_name
        if name == "linear":
            return linear_kernel(A, B)
        if name == "cosine":
            return cosine_kernel(A, B)
        if name == "polynomial":
            return polynomial_kernel(
                A, B, gamma=self._poly_gamma, degree=self.degree, coef0=float(self.coef0)
            )
        bw = self._bw
        row_scales = None
        if new and bw.local is not None:
            row_scales = query_local_scales(self._X_fit, A, bw)
        owner = type(self).__name__ if check else None
        if name == "rbf" and bw.local is None and not check:
            return rbf_kernel(A, B, gamma=bw.gamma)
        if name == "rbf":
            distances = squared_distances(A, B)
            kernel = rbf_from_distances
        else:
            distances = manhattan_distances(A, B)
            kernel = laplacian_from_distances
        return kernel(
            distances, bw, rows, cols, row_scales=row_scales, check_owner=owner, overwrite=True
        )

    # -- fitting -------------------------------------------------------------------------

    def fit(self, X, y=None):
        """Fit the kernel principal components of ``X`` (or of a precomputed kernel)."""
        X = validate_input(self, X, reset=True)
        n, d = X.shape
        check_params(self, n_samples=n, n_features=d)
        owner = type(self).__name__
        self._kernel_name = self.kernel.lower()
        k = self.n_components
        if self.n_landmarks is not None and self.n_landmarks <= k:
            raise InputError(
                f"the parameter `n_landmarks` of `{owner}` must be greater than n_components "
                f"= {k} (the Nyström features need rank above the components), got "
                f"{self.n_landmarks}"
            )
        rng = check_random_state(self.random_state)
        self._poly_gamma = float(self.gamma) if self.gamma is not None else 1.0 / d
        if self._kernel_name == "precomputed":
            _check_precomputed(X, owner)
        self._resolve_scale(X, rng)
        self._X_fit = X.copy() if self._kernel_name != "precomputed" else None
        self.landmarks_ = None
        if self.n_landmarks is None:
            self._fit_exact(X, k, rng)
        else:
            self._fit_nystrom(X, k, rng)
        self.n_components_ = k
        return self

    def _keep(self, vectors, values, rng) -> np.ndarray:
        """Residuals of the examined eigenvectors and the columns to keep (fitted here)."""
        positive = values > 1e-10 * max(float(values[0]), np.finfo(float).tiny)
        keep, self.eigen_residuals_ = choose_coordinates(
            vectors, self.coordinates.lower(), self.n_components, usable=positive, random_state=rng
        )
        self.eigenvector_indices_ = keep
        return keep

    def _fit_exact(self, X, k, rng):
        n = X.shape[0]
        k = examined_count(self.coordinates.lower(), k, n - 1)
        solver = self.solver.lower()
        if solver == "auto":
            solver = "dense" if n <= DENSE_LIMIT or 5 * k > n else "arpack"
        # Iterative solvers only need products J K J v (J = I - 11^T/n) with a kernel known to
        # be positive semi-definite: no centred copy of K, and BLAS reads one triangle of it.
        products = solver != "dense" and not self._indefinite_possible()
        triangle = products and self._kernel_name == "rbf" and self._bw.local is None
        if self._kernel_name == "precomputed":
            K = X.copy()
        elif triangle:
            K = rbf_kernel_upper(X, gamma=self._bw.gamma)
        else:
            K = self._kernel_block(X, None)
        if triangle:
            column_means = (K.sum(axis=0) + K.sum(axis=1) - 1.0) / n  # the diagonal is exp(0)
        else:
            column_means = K.mean(axis=0)
        if self._bw is not None:
            # every self weight is exp(0) = 1, so a column summing to 1 has no other weight
            isolated = int(np.sum(column_means * n - 1.0 <= 0.0))
            if isolated:
                raise underflow_error(self._bw, type(self).__name__, isolated, n)
        grand = float(column_means.mean())
        if products:
            operator = _centred_kernel_operator(K)
        else:
            K -= column_means[None, :]
            K -= (column_means - grand)[:, None]
            operator = K
        top = top_eigenpairs(operator, k, solver=solver, random_state=rng, tol=ARPACK_TOL)
        values = self._checked_spectrum(K, top.values, rng)
        keep = self._keep(top.vectors, values, rng)
        values, vectors = values[keep], top.vectors[:, keep]
        root = np.sqrt(values)
        self._column_means = column_means
        self._grand_mean = grand
        self._alphas = vectors * np.divide(1.0, root, out=np.zeros_like(root), where=root > 0)
        self.embedding_ = vectors * root
        self.eigenvalues_ = values
        self.solver_ = top.solver

    def _indefinite_possible(self) -> bool:
        # rbf, laplacian, linear, cosine and polynomial kernels with coef0 >= 0 are positive
        # semi-definite in exact arithmetic: only a user's matrix or coef0 < 0 needs a look
        return self._kernel_name == "precomputed" or (
            self._kernel_name == "polynomial" and self.coef0 < 0
        )

    def _checked_spectrum(self, K, values, rng):
        """Clip rounding negatives; refuse a kernel that is not positive semi-definite."""
        largest = max(float(values[0]), 0.0)
        floor = -NEGATIVE_TOLERANCE * largest - 1e-10
        lowest = float(values[-1])
        if self._indefinite_possible() and lowest >= floor:
            K *= -1.0
            solver = "dense" if K.shape[0] <= DENSE_LIMIT else "arpack"
            lowest = -float(top_eigenpairs(K, 1, solver=solver, random_state=rng, tol=1e-6)[0][0])
            K *= -1.0
        if lowest < floor:
            raise InputError(
                f"the kernel of `{type(self).__name__}` (kernel={self.kernel!r}) is not positive "
                f"semi-definite: its centred spectrum reaches {lowest:.4g} against a largest "
                f"eigenvalue of {largest:.4g}; pass a positive semi-definite kernel (a Gram "
                "matrix, not distances) or, for the polynomial kernel, coef0 >= 0"
            )
        return np.clip(values, 0.0, None)

    def _fit_nystrom(self, X, k, rng):
        n = X.shape[0]
        m = self.n_landmarks
        idx = np.sort(rng.choice(n, m, replace=False))
        self.landmarks_ = idx
        if self._kernel_name == "precomputed":
            K_mm = X[np.ix_(idx, idx)].copy()
        else:
            K_mm = self._kernel_block(X[idx], X[idx], idx, idx)
        values, vectors = scipy.linalg.eigh(K_mm, check_finite=False)
        floor = -NEGATIVE_TOLERANCE * max(float(values[-1]), 0.0) - 1e-10
        if values[0] < floor:
            raise InputError(
                f"the kernel of `{type(self).__name__}` (kernel={self.kernel!r}) is not positive "
                f"semi-definite: the landmarks' kernel has the eigenvalue {values[0]:.4g} "
                f"against a largest of {values[-1]:.4g}; pass a positive semi-definite kernel "
                "or, for the polynomial kernel, coef0 >= 0"
            )
        keep = values > 1e-12 * max(float(values[-1]), np.finfo(float).tiny)
        # Phi = K_nm U L^-1/2 are features with Phi Phi^T = K_nm K_mm^+ K_mn
        self._nystrom_map = vectors[:, keep] / np.sqrt(values[keep])
        r = self._nystrom_map.shape[1]
        if r < k:
            raise InputError(
                f"the parameter `n_landmarks` of `{type(self).__name__}` gives a landmark kernel "
                f"of rank {r}, below n_components = {k}; use more landmarks"
            )
        k = examined_count(self.coordinates.lower(), k, r)
        total = np.zeros(r)
        scatter = np.zeros((r, r))
        for _, Phi in self._nystrom_blocks(X, train=True):
            total += Phi.sum(axis=0)
            scatter += Phi.T @ Phi
        mean = total / n
        scatter -= n * np.outer(mean, mean)
        mu, axes = scipy.linalg.eigh(scatter, subset_by_index=(r - k, r - 1), check_finite=False)
        mu, axes = mu[::-1], axes[:, ::-1]
        self._nystrom_mean = mean
        self._nystrom_axes = axes
        scores = np.empty((n, k))
        for rows, Phi in self._nystrom_blocks(X, train=True):
            scores[rows] = (Phi - mean) @ axes
        # signs as _eigen.fix_signs on the eigenvectors v = scores / sqrt(mu)
        flip = np.sign(scores[np.argmax(np.abs(scores), axis=0), np.arange(k)])
        flip[flip == 0] = 1.0
        self._nystrom_axes *= flip
        scores *= flip
        mu = np.clip(mu, 0.0, None)
        keep = self._keep(scores, mu, rng)
        self._nystrom_axes = self._nystrom_axes[:, keep]
        self.embedding_ = np.ascontiguousarray(scores[:, keep])
        self.eigenvalues_ = mu[keep]
        self.solver_ = "nystrom"

    def _nystrom_blocks(self, X, *, train):
        n = X.shape[0]
        m = self.landmarks_.size
        step = max(1, _BLOCK_ENTRIES // m)
        landmarks = None if self._X_fit is None else self._X_fit[self.landmarks_]
        for start in range(0, n, step):
            rows = slice(start, min(n, start + step))
            if self._kernel_name == "precomputed":
                K = X[rows][:, self.landmarks_]
            else:
                index = np.arange(rows.start, rows.stop) if train else None
                K = self._kernel_block(
                    X[rows], landmarks, index, self.landmarks_, new=not train, check=train
                )
            yield rows, K @ self._nystrom_map

    # -- results -------------------------------------------------------------------------

    def fit_transform(self, X, y=None):
        """Fit and return the scores of the training points."""
        return self.fit(X).embedding_.copy()

    def transform(self, X):
        """Scores of new points (for a precomputed kernel: their kernel with the training set)."""
        check_is_fitted(self)
        X = validate_input(self, X, reset=False, min_samples=1)
        if self.landmarks_ is not None:
            out = np.empty((X.shape[0], self.n_components_))
            for rows, Phi in self._nystrom_blocks(X, train=False):
                out[rows] = (Phi - self._nystrom_mean) @ self._nystrom_axes
            return out
        if self._kernel_name == "precomputed":
            K = X.copy()
        else:
            K = self._kernel_block(X, self._X_fit, new=True)
        row_means = K.mean(axis=1)
        K -= self._column_means[None, :]
        K -= row_means[:, None]
        K += self._grand_mean
        return K @ self._alphas

    @property
    def _n_features_out(self):
        return self.n_components_


def _check_precomputed(K: np.ndarray, owner: str) -> None:
    n, d = K.shape
    if n != d:
        raise InputError(
            f"the parameter `kernel` of `{owner}` is 'precomputed', so `X` must be a square "
            f"kernel matrix, got shape ({n}, {d}); pass the kernel between the training points"
        )
    check_symmetric(K, owner, "kernel")
