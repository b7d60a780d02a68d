"""Linear methods: principal component analysis and classical (and landmark) MDS.

Both rest on the leading singular triplets of the centred data Xc = U S V^T: PCA's scores are
U S and its axes V; for Euclidean distances classical MDS's Gram matrix B = Xc Xc^T has the
eigenvectors U and the eigenvalues S^2, so feature input never needs an n x n matrix. The
triplets come from the d x d scatter matrix for tall data, LAPACK's thin SVD, or a randomized
range finder with power iterations (Halko, Martinsson & Tropp 2011).
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np
import scipy.linalg
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
from lowdim.methods._kernels import squared_distances

__all__ = ["PCAEmbedding", "ClassicalMDS"]

_BLOCK_ROWS = 16384
# ARPACK's relative residual: about half the products of a machine-precision solve, with
# eigenvectors still agreeing with a dense solve to ~1e-11 on 4,000 points
ARPACK_TOL = 1e-8
# Negative eigenvalues carrying more than this share of |spectrum| trigger a warning.
NEGATIVE_SHARE_WARNING = 0.05


# ---------------------------------------------------------------------------------------
# principal axes of the centred data


class _Axes(NamedTuple):
    mean: np.ndarray  # (d,)
    singular_values: np.ndarray  # (k,) descending
    components: np.ndarray  # (k, d), rows are right singular vectors
    scores: np.ndarray  # (n, k) = U S
    total: float  # |Xc|_F^2, the sum of all squared singular values
    solver: str


def _check_n_components(owner: str, n_components: int, n_samples: int, n_features: int) -> None:
    high = min(n_samples - 1, n_features)
    if n_components > high:
        raise InputError(
            f"the parameter `n_components` of `{owner}` must be an int in "
            f"[1, min(n_samples - 1, n_features)] = [1, {high}] "
            f"(n_samples={n_samples}, n_features={n_features}), got {n_components}"
        )


def _centred_blocks(X: np.ndarray, mean: np.ndarray):
    """Yield (rows, X[rows] - mean) so that no centred copy of a tall X is held."""
    for start in range(0, X.shape[0], _BLOCK_ROWS):
        rows = slice(start, start + _BLOCK_ROWS)
        yield rows, X[rows] - mean


def _choose_solver(solver: str, n: int, d: int, k: int) -> str:
    if solver == "randomized":
        return "randomized"
    if d <= 1000 and n >= 10 * d:
        return "scatter_eigh"
    if solver == "full" or max(n, d) <= 500 or k >= 0.8 * min(n, d):
        return "svd"
    return "randomized"


def _scatter_eigh(X, mean, k):
    n, d = X.shape
    C = X.T @ X
    C -= n * np.outer(mean, mean)
    spread = np.diag(C) / n
    # X^T X - n m m^T loses about log10(m^2 / variance) digits: far-off means are centred first
    if np.any(mean**2 > 1e6 * np.maximum(spread, np.finfo(float).tiny)):
        C = np.zeros((d, d))
        for _, block in _centred_blocks(X, mean):
            C += block.T @ block
    values, vectors = scipy.linalg.eigh(C, subset_by_index=(d - k, d - 1), check_finite=False)
    return np.sqrt(np.clip(values[::-1], 0.0, None)), vectors[:, ::-1].T, float(np.trace(C))


def _thin_svd(X, mean, k):
    _, S, Vt = scipy.linalg.svd(X - mean, full_matrices=False, check_finite=False)
    return S[:k], Vt[:k], float(np.sum(S**2))


def _randomized_svd(X, mean, k, rng):
    n, d = X.shape
    Xc = X - mean
    size = min(k + 10, n, d)
    n_iter = 7 if k < 0.1 * min(n, d) else 4
    Q = Xc @ rng.normal(size=(d, size))
    for _ in range(n_iter):
        # re-orthonormalising between products keeps small singular directions from drowning
        Q, _ = scipy.linalg.qr(Q, mode="economic", check_finite=False)
        Q, _ = scipy.linalg.qr(Xc.T @ Q, mode="economic", check_finite=False)
        Q = Xc @ Q
    Q, _ = scipy.linalg.qr(Q, mode="economic", check_finite=False)
    _, S, Vt = scipy.linalg.svd(Q.T @ Xc, full_matrices=False, check_finite=False)
    return S[:k], Vt[:k], float(np.einsum("ij,ij->", Xc, Xc))


def _principal_axes(X, k, *, solver, random_state, signs):
    """The ``k`` leading axes; ``signs`` = "components" (as PCA) or "scores" (as MDS)."""
    n, d = X.shape
    mean = X.mean(axis=0)
    used = _choose_solver(solver, n, d, k)
    if used == "scatter_eigh":
        S, Vt, total = _scatter_eigh(X, mean, k)
    elif used == "svd":
        S, Vt, total = _thin_svd(X, mean, k)
    else:
        S, Vt, total = _randomized_svd(X, mean, k, check_random_state(random_state))
    Vt = np.ascontiguousarray(Vt)
    # (X - mean) V = X V - mean V: one product, no centred copy of X; BLAS runs the skinny
    # product faster as (V^T X^T)^T than as X V
    scores = np.ascontiguousarray((Vt @ X.T).T)
    scores -= mean @ Vt.T
    # as _eigen.fix_signs: the largest-magnitude entry of each sign-defining vector is positive
    if signs == "components":
        flip = np.sign(Vt[np.arange(k), np.argmax(np.abs(Vt), axis=1)])
    else:
        flip = np.sign(scores[np.argmax(np.abs(scores), axis=0), np.arange(k)])
    flip[flip == 0] = 1.0
    Vt *= flip[:, None]
    scores *= flip
    return _Axes(mean, S, Vt, scores, total, used)


class PCAEmbedding(ClassNamePrefixFeaturesOutMixin, TransformerMixin, BaseEstimator):
    """Principal component analysis: the linear projection of largest variance.

    Parameters
    ----------
    n_components : int, default=2
        Number of components, in [1, min(n_samples - 1, n_features)].
    solver : {"auto", "full", "randomized"}, default="auto"
        ``"full"`` is exact: the eigendecomposition of the d x d scatter matrix for tall data
        (d <= 1000 and n >= 10 d), else LAPACK's thin SVD. ``"randomized"`` is the randomized
        range finder with power iterations [2]_. ``"auto"`` takes the scatter route for tall
        data, the thin SVD for small data or many components, and the randomized one else.
    random_state : int, RandomState or None, default=None
        Seeds the randomized solver.

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
        Scores of the training points.
    components_ : ndarray of shape (n_components, n_features)
        Principal axes, sorted by explained variance.
    mean_ : ndarray of shape (n_features,)
    explained_variance_ : ndarray of shape (n_components,)
        Variance along each axis (with n_samples - 1 in the denominator).
    explained_variance_ratio_ : ndarray of shape (n_components,)
        Share of the total variance along each axis.
    singular_values_ : ndarray of shape (n_components,)
    eigenvalues_ : ndarray of shape (n_components,)
        Eigenvalues of the covariance matrix, equal to ``explained_variance_``.
    n_components_ : int
    solver_ : str
        ``"scatter_eigh"``, ``"svd"`` or ``"randomized"``.
    n_features_in_ : int

    Notes
    -----
    The sign of each axis is fixed so that its largest-magnitude entry is positive.

    References
    ----------
    .. [1] I. T. Jolliffe, *Principal Component Analysis*, 2nd ed., Springer, 2002.
       https://doi.org/10.1007/b98835
    .. [2] N. Halko, P.-G. Martinsson and J. A. Tropp, "Finding structure with randomness",
       SIAM Review 53 (2011), 217-288. https://doi.org/10.1137/090771806

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(0).normal(size=(50, 5))
    >>> PCAEmbedding(n_components=2).fit_transform(X).shape
    (50, 2)
    """

    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "solver": [Options(("auto", "full", "randomized"))],
        "random_state": RANDOM_STATE,
    }
    _reference = "Pearson, Philosophical Magazine 2, 1901; Hotelling, J. Educ. Psychol. 24, 1933"

    def __init__(self, *, n_components=2, solver="auto", random_state=None):
        self.n_components = n_components
        self.solver = solver
        self.random_state = random_state

    def fit(self, X, y=None):
        """Fit the principal axes of ``X`` (n_samples x n_features)."""
        X = validate_input(self, X, reset=True)
        n, d = X.shape
        check_params(self, n_samples=n, n_features=d)
        _check_n_components(type(self).__name__, self.n_components, n, d)
        axes = _principal_axes(
            X,
            self.n_components,
            solver=self.solver.lower(),
            random_state=self.random_state,
            signs="components",
        )
        self.mean_ = axes.mean
        self.components_ = axes.components
        self.singular_values_ = axes.singular_values
        self.explained_variance_ = axes.singular_values**2 / (n - 1)
        total = axes.total if axes.total > 0 else 1.0
        self.explained_variance_ratio_ = axes.singular_values**2 / total
        self.eigenvalues_ = self.explained_variance_
        self.embedding_ = axes.scores
        self.n_components_ = self.n_components
        self.solver_ = axes.solver
        return self

    def fit_transform(self, X, y=None):
        """Fit and return the scores of the training points."""
        return self.fit(X).embedding_.copy()

    def transform(self, X):
        """Project new points onto the principal axes."""
        check_is_fitted(self)
        X = validate_input(self, X, reset=False, min_samples=1)
        return (X - self.mean_) @ self.components_.T

    @property
    def _n_features_out(self):
        return self.n_components_


# ---------------------------------------------------------------------------------------
# classical and landmark MDS


class _Scaling(NamedTuple):
    values: np.ndarray  # (k,) top eigenvalues of B, descending (non-positive ones kept)
    coordinates: np.ndarray  # (m, k) = V sqrt(max(values, 0))
    pinv: np.ndarray  # (m, k): columns v_i / sqrt(l_i), 0 where l_i <= 0 (L# transposed)
    mean_sq: np.ndarray  # (m,): mean column of the squared dissimilarities
    negative_share: float
    solver: str


def _double_centre(D2: np.ndarray) -> np.ndarray:
    """B = -1/2 J D2 J in place for a symmetric D2; returns D2."""
    means = D2.mean(axis=0)
    D2 -= means[None, :]
    D2 -= means[:, None]
    D2 += means.mean()
    D2 *= -0.5
    return D2


def _negative_mass(B: np.ndarray, vectors: np.ndarray, values: np.ndarray, rng) -> float:
    """Estimate N = sum of |negative eigenvalues| of B by stochastic Lanczos quadrature.

    Ubaru, Chen & Saad, SIAM J. Matrix Anal. Appl. 38 (2017), https://doi.org/10.1137/16M1104974:
    for Rademacher probes z, z^T f(B) z ~ |z|^2 sum_j tau_j^2 f(theta_j) from the Ritz values
    theta_j and first eigenvector entries tau_j of the Lanczos tridiagonal matrix, here with
    f(x) = max(-x, 0). The known top eigenpairs are deflated first, so a positive
    semi-definite remainder gives N ~ 0 instead of the noise of a trace estimate. The probes
    run side by side: each step is one matrix-matrix product.
    """
    n = B.shape[0]
    probes, steps = 16, min(20, n)
    q = rng.choice([-1.0, 1.0], size=(n, probes)) / np.sqrt(n)
    q_prev = np.zeros_like(q)
    alphas = np.zeros((steps, probes))
    betas = np.zeros((steps, probes))
    beta = np.zeros(probes)
    for j in range(steps):
        w = B @ q - vectors @ (values[:, None] * (vectors.T @ q))
        alphas[j] = np.einsum("ij,ij->j", q, w)
        w -= alphas[j] * q + beta * q_prev
        beta = np.linalg.norm(w, axis=0)
        betas[j] = beta
        q_prev, q = q, w / np.where(beta > 0, beta, 1.0)
    scale = max(float(np.max(np.abs(values))), np.finfo(float).tiny)
    total = 0.0
    for p in range(probes):
        # an invariant subspace found early ends that probe's recurrence
        small = np.flatnonzero(betas[:, p] <= 1e-12 * scale)
        size = int(small[0]) + 1 if small.size else steps
        theta, tau = scipy.linalg.eigh_tridiagonal(alphas[:size, p], betas[: size - 1, p])
        total += n * float(np.sum(tau[0] ** 2 * np.clip(-theta, 0.0, None)))
    return total / probes


def _negative_share(B: np.ndarray, vectors: np.ndarray, values: np.ndarray, rng) -> float:
    """The share N / (P + N) of sum |lambda| carried by the negative eigenvalues of B.

    P - N = trace(B) is exact; N is exact for small matrices and estimated by stochastic
    Lanczos quadrature (:func:`_negative_mass`) for large ones.
    """
    trace = float(np.trace(B))
    if B.shape[0] <= DENSE_LIMIT:
        spectrum = scipy.linalg.eigvalsh(B, check_finite=False)
        negative = float(-np.sum(spectrum[spectrum < 0]))
    else:
        negative = _negative_mass(B, vectors, values, rng)
    mass = trace + 2.0 * negative
    if mass <= 0:
        return 0.0
    share = negative / mass
    return 0.0 if share < 1e-8 else min(share, 1.0)


def _classical_scaling(D2: np.ndarray, k: int, rng) -> _Scaling:
    """Classical MDS of squared dissimilarities ``D2`` (overwritten with B)."""
    mean_sq = D2.mean(axis=0)
    B = _double_centre(D2)
    top = top_eigenpairs(B, k, random_state=rng, tol=ARPACK_TOL)
    scale = max(float(np.max(np.abs(top.values))), np.finfo(float).tiny)
    values = np.where(np.abs(top.values) < 1e-10 * scale, 0.0, top.values)
    root = np.sqrt(np.clip(values, 0.0, None))
    inverse = np.divide(1.0, root, out=np.zeros_like(root), where=root > 0)
    return _Scaling(
        values=values,
        coordinates=top.vectors * root,
        pinv=top.vectors * inverse,
        mean_sq=mean_sq,
        negative_share=_negative_share(B, top.vectors, top.values, rng),
        solver=top.solver,
    )


def _triangulate(sq: np.ndarray, scaling: _Scaling) -> np.ndarray:
    """Landmark MDS's x_a = -1/2 L# (delta_a - delta_mu) for rows of squared dissimilarities."""
    return -0.5 * (sq - scaling.mean_sq) @ scaling.pinv


class ClassicalMDS(ClassNamePrefixFeaturesOutMixin, TransformerMixin, BaseEstimator):
    """Classical multidimensional scaling (principal coordinates), with a landmark variant.

    Parameters
    ----------
    n_components : int, default=2
        Number of coordinates, in [1, n_samples - 1].
    metric : {"euclidean", "precomputed"}, default="euclidean"
        ``"euclidean"``: ``X`` holds features and the Euclidean distances are used through
        the PCA equivalence, with no n x n matrix. ``"precomputed"``: ``X`` is a square,
        symmetric matrix of dissimilarities.
    n_landmarks : int or None, default=None
        Landmark MDS [3]_: classical MDS on this many random landmarks, every other point
        placed by distance-based triangulation. Needs more landmarks than components.
    random_state : int, RandomState or None, default=None
        Seeds the choice of landmarks and the eigen-solver's start vector.

    Attributes
    ----------
    embedding_ : ndarray of shape (n_samples, n_components)
    eigenvalues_ : ndarray of shape (n_components,)
        Top eigenvalues of the double-centred matrix B = -1/2 J D^2 J (of the landmarks'
        matrix for landmark MDS); for Euclidean input the squared singular values of the
        centred data. Coordinates of a non-positive eigenvalue are 0.
    negative_eigenvalue_share_ : float
        Share of sum |lambda| carried by negative eigenvalues of B (0 for Euclidean input);
        above 0.05 a warning says the dissimilarities are not Euclidean. With P and N the
        positive and negative masses, P - N = trace(B) is exact; N is exact up to 600 points
        and estimated above by stochastic Lanczos quadrature [4]_ on B with its top
        eigenpairs deflated, never by a full eigendecomposition of a large matrix.
    landmarks_ : ndarray of int or None
        Indices of the landmarks, sorted.
    n_components_ : int
    solver_ : str
    n_features_in_ : int

    Notes
    -----
    ``transform`` places new points by triangulation [3]_: from their features
    (``"euclidean"``; without landmarks this is the projection onto the principal axes), or
    from their dissimilarities to the training points (``"precomputed"``; an array of shape
    (n_new, n_samples)). Training points are placed at their own coordinates exactly.

    References
    ----------
    .. [1] W. S. Torgerson, "Multidimensional scaling: I. Theory and method", Psychometrika 17
       (1952), 401-419. https://doi.org/10.1007/BF02288916
    .. [2] J. C. Gower, "Some distance properties of latent root and vector methods used in
       multivariate analysis", Biometrika 53 (1966), 325-338.
       https://doi.org/10.1093/biomet/53.3-4.325
    .. [3] V. de Silva and J. B. Tenenbaum, "Sparse multidimensional scaling using landmark
       points", Technical report, Stanford University, 2004.
    .. [4] S. Ubaru, J. Chen and Y. Saad, "Fast estimation of tr(f(A)) via stochastic Lanczos
       quadrature", SIAM J. Matrix Anal. Appl. 38 (2017), 1075-1099.
       https://doi.org/10.1137/16M1104974

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(0).normal(size=(60, 4))
    >>> ClassicalMDS(n_components=2).fit_transform(X).shape
    (60, 2)
    """

    _param_specs = {
        "n_components": [Interval(int, 1, "n_samples - 1")],
        "metric": [Options(("euclidean", "precomputed"))],
        "n_landmarks": [NONE, Interval(int, 2, "n_samples")],
        "random_state": RANDOM_STATE,
    }
    _reference = "Torgerson, Psychometrika 17, 1952; Gower, Biometrika 53, 1966"

    def __init__(self, *, n_components=2, metric="euclidean", n_landmarks=None, random_state=None):
        self.n_components = n_components
        self.metric = metric
        self.n_landmarks = n_landmarks
        self.random_state = random_state

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.pairwise = str(self.metric).lower() == "precomputed"
        return tags

    def _precomputed(self) -> bool:
        return self.metric.lower() == "precomputed"

    def fit(self, X, y=None):
        """Fit the coordinates of ``X`` (features, or dissimilarities if precomputed)."""
        X = validate_input(self, X, reset=True)
        n, d = X.shape
        check_params(self, n_samples=n, n_features=d)
        owner = type(self).__name__
        if self._precomputed():
            _check_dissimilarities(X, owner)
        k = self.n_components
        m = self.n_landmarks
        if m is not None and m <= k:
            raise InputError(
                f"the parameter `n_landmarks` of `{owner}` must be greater than n_components "
                f"= {k} (landmark MDS needs more landmarks than coordinates), got {m}"
            )
        rng = check_random_state(self.random_state)
        self.landmarks_ = None
        self._scaling = None
        if m is not None:
            self._fit_landmarks(X, m, rng)
        elif self._precomputed():
            self._scaling = _classical_scaling(X**2, k, rng)
            self.embedding_ = self._scaling.coordinates
            self.eigenvalues_ = self._scaling.values
            self.negative_eigenvalue_share_ = self._scaling.negative_share
            self.solver_ = self._scaling.solver
        else:
            self._fit_features(X, k, rng)
        self.n_components_ = k
        if self.negative_eigenvalue_share_ > NEGATIVE_SHARE_WARNING:
            warnings.warn(
                f"{owner}: the dissimilarities are not Euclidean: negative eigenvalues carry "
                f"about {self.negative_eigenvalue_share_:.1%} of the spectrum; the embedding "
                "keeps the positive part only",
                UserWarning,
                stacklevel=2,
            )
        return self

    def _fit_features(self, X, k, rng):
        usable = min(k, X.shape[1])
        axes = _principal_axes(X, usable, solver="auto", random_state=rng, signs="scores")
        # beyond the rank of the data the eigenvalues are 0, and so are the coordinates
        pad = k - usable
        self.embedding_ = np.pad(axes.scores, ((0, 0), (0, pad)))
        self.eigenvalues_ = np.pad(axes.singular_values**2, (0, pad))
        self._mean = axes.mean
        self._components = axes.components
        self._pad = pad
        self.negative_eigenvalue_share_ = 0.0
        self.solver_ = axes.solver

    def _fit_landmarks(self, X, m, rng):
        n = X.shape[0]
        idx = np.sort(rng.choice(n, m, replace=False))
        if self._precomputed():
            sq_landmarks = X[np.ix_(idx, idx)] ** 2
        else:
            self._landmark_points = X[idx].copy()
            sq_landmarks = squared_distances(self._landmark_points)
        scaling = _classical_scaling(sq_landmarks, self.n_components, rng)
        self._scaling = scaling
        self.landmarks_ = idx
        self.embedding_ = self._place(X)
        self.embedding_[idx] = scaling.coordinates  # exact, not up to rounding
        self.eigenvalues_ = scaling.values
        self.negative_eigenvalue_share_ = scaling.negative_share
        self.solver_ = scaling.solver

    def _place(self, X):
        """Triangulate rows of X (features or dissimilarities to the training points)."""
        out = np.empty((X.shape[0], self._scaling.pinv.shape[1]))
        for start in range(0, X.shape[0], _BLOCK_ROWS):
            block = X[start : start + _BLOCK_ROWS]
            if not self._precomputed():
                sq = squared_distances(block, self._landmark_points)
            elif self.landmarks_ is not None:
                sq = block[:, self.landmarks_] ** 2
            else:
                sq = block**2
            out[start : start + _BLOCK_ROWS] = _triangulate(sq, self._scaling)
        return out

    def fit_transform(self, X, y=None):
        """Fit and return the coordinates of the training points."""
        return self.fit(X).embedding_.copy()

    def transform(self, X):
        """Place new points: features for "euclidean", dissimilarities for "precomputed"."""
        check_is_fitted(self)
        X = validate_input(self, X, reset=False, min_samples=1)
        if self._scaling is None:
            scores = (X - self._mean) @ self._components.T
            return np.pad(scores, ((0, 0), (0, self._pad)))
        return self._place(X)

    @property
    def _n_features_out(self):
        return self.n_components_


def _check_dissimilarities(D: np.ndarray, owner: str) -> None:
    n, d = D.shape
    if n != d:
        raise InputError(
            f"the parameter `metric` of `{owner}` is 'precomputed', so `X` must be a square "
            f"matrix of dissimilarities, got shape ({n}, {d}); pass pairwise dissimilarities "
            "or use metric='euclidean' for features"
        )
    check_symmetric(D, owner, "metric")
