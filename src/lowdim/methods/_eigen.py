"""One front for the symmetric eigen-solvers the spectral methods use.

``top_eigenpairs`` returns the largest eigenpairs of a symmetric matrix with the solver chosen
for its size: LAPACK's ``eigh`` restricted to the wanted indices for small problems, ARPACK's
Lanczos (``eigsh``) for large or sparse ones, and a randomized subspace iteration (Halko,
Martinsson & Tropp, SIAM Review 53, 2011) when asked. Every solver's start is drawn from
``random_state`` and every result's signs are fixed by :func:`fix_signs`, so runs repeat.

``smallest_laplacian_eigenpairs`` returns the smallest eigenpairs of a sparse graph Laplacian
through a chain: AMG-preconditioned LOBPCG, then shift-invert ARPACK, then dense ``eigh`` for
small n, warning at each fallback and recording the solver that finished.
"""

from __future__ import annotations

import warnings
from typing import NamedTuple

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg
from sklearn.utils import check_random_state

__all__ = [
    "EigenResult",
    "fix_signs",
    "top_eigenpairs",
    "DENSE_LIMIT",
    "LAPLACIAN_SOLVERS",
    "SolverFallbackWarning",
    "smallest_laplacian_eigenpairs",
]

# Below this size a dense eigh (subset) is faster and more robust than Lanczos.
DENSE_LIMIT = 600


class EigenResult(NamedTuple):
    """Eigenvalues (descending), eigenvectors as columns, and the solver that produced them."""

    values: np.ndarray
    vectors: np.ndarray
    solver: str


def fix_signs(vectors: np.ndarray) -> np.ndarray:
    """Flip each column so that its largest-magnitude entry is positive (in place; returned).

    The same rule as scikit-learn's ``svd_flip`` on the columns of ``u``: ties in magnitude go
    to the lowest index, so the choice is deterministic.
    """
    if vectors.size == 0:
        return vectors
    rows = np.argmax(np.abs(vectors), axis=0)
    signs = np.sign(vectors[rows, np.arange(vectors.shape[1])])
    signs[signs == 0] = 1.0
    vectors *= signs
    return vectors


def _dense(A: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    n = A.shape[0]
    values, vectors = scipy.linalg.eigh(A, subset_by_index=(n - k, n - 1))
    return values[::-1], vectors[:, ::-1]


def _arpack(A, k: int, rng: np.random.RandomState, tol: float) -> tuple[np.ndarray, np.ndarray]:
    n = A.shape[0]
    v0 = rng.uniform(-1.0, 1.0, n)
    values, vectors = scipy.sparse.linalg.eigsh(A, k=k, which="LA", v0=v0, tol=tol)
    order = np.argsort(values)[::-1]
    return values[order], vectors[:, order]


def _randomized(
    A, k: int, rng: np.random.RandomState, n_oversamples: int = 10, n_iter: int = 7
) -> tuple[np.ndarray, np.ndarray]:
    """Subspace iteration with QR re-orthonormalisation, then Rayleigh-Ritz.

    Converges to the eigenvalues of largest magnitude; the callers use it on positive
    semi-definite matrices, where those are the largest.
    """
    n = A.shape[0]
    size = min(n, k + n_oversamples)
    Q = rng.normal(size=(n, size))
    for _ in range(n_iter):
        Q, _ = np.linalg.qr(A @ Q)
    Q, _ = np.linalg.qr(A @ Q)
    small = Q.T @ (A @ Q)
    small = (small + small.T) / 2.0
    values, vectors = np.linalg.eigh(small)
    order = np.argsort(values)[::-1][:k]
    return values[order], Q @ vectors[:, order]


def top_eigenpairs(
    A,
    k: int,
    *,
    solver: str = "auto",
    random_state=None,
    tol: float = 0.0,
) -> EigenResult:
    """Return the ``k`` largest eigenpairs of the symmetric matrix or operator ``A``.

    Parameters
    ----------
    A : ndarray, sparse matrix or LinearOperator of shape (n, n)
        Symmetric. A LinearOperator works with ``"arpack"`` and ``"randomized"``.
    k : int
        Number of eigenpairs, ``1 <= k < n``.
    solver : {"auto", "dense", "arpack", "randomized"}, default="auto"
        ``"auto"`` takes ``"dense"`` for a dense array with ``n <= DENSE_LIMIT`` or when
        ``k`` is over a fifth of ``n``, and ``"arpack"`` otherwise.
    random_state : int, RandomState or None
        Seeds the ARPACK start vector and the randomized test matrix.
    tol : float, default=0.0
        ARPACK's relative accuracy (0 means machine precision).

    Returns
    -------
    EigenResult
        ``values`` in descending order, ``vectors`` as columns with signs fixed, ``solver``.
    """
    n = A.shape[0]
    if not 1 <= k <= n:
        raise ValueError(f"`k` must satisfy 1 <= k <= n = {n}, got {k}")
    rng = check_random_state(random_state)
    is_dense = isinstance(A, np.ndarray)
    if solver == "auto":
        solver = "dense" if is_dense and (n <= DENSE_LIMIT or 5 * k > n) else "arpack"
    if solver == "arpack" and k >= n - 1:
        solver = "dense"  # ARPACK needs k < n - 1 for a symmetric problem
    if solver == "dense":
        if not is_dense:
            A = A.toarray() if scipy.sparse.issparse(A) else A @ np.eye(n)
        values, vectors = _dense(A, k)
    elif solver == "arpack":
        values, vectors = _arpack(A, k, rng, tol)
    elif solver == "randomized":
        values, vectors = _randomized(A, k, rng)
    else:
        raise ValueError(
            f"`solver` must be one of 'auto', 'dense', 'arpack', 'randomized', got {solver!r}"
        )
    vectors = fix_signs(np.ascontiguousarray(vectors))
    return EigenResult(values, vectors, solver)


# ---------------------------------------------------------------------------------------
# smallest eigenpairs of a graph Laplacian

LAPLACIAN_SOLVERS = ("auto", "amg", "arpack", "dense")
# The dense last resort holds an n x n array; above this size a failure is raised instead.
DENSE_FALLBACK_LIMIT = 6000
# LOBPCG below this many nodes per wanted vector is unreliable (it falls back to eigh inside).
_LOBPCG_MIN_NODES_PER_VECTOR = 5
# LOBPCG's default residual target for unit vectors (times the Laplacian's scale). The Nyström
# extension of a graph method reproduces a training point with an error of two to three
# times the residual (relative to the largest coordinate; measured at 700 and 20,000 points),
# so this keeps transform(X_train) within 1e-6 of the embedding. It costs 15 W-cycle
# iterations against 7 V-cycle ones at the former 1e-6 sqrt(n) on a 100,000-point swiss roll
# (DEVELOPERS.md).
TARGET_RESIDUAL = 1e-7
# A result that stops short of the target is still accepted below this times sqrt(n) x scale.
LOOSE_RESIDUAL = 1e-5


class SolverFallbackWarning(RuntimeWarning):
    """An eigen-solver failed and the next one in the chain was used."""


class _SolverFailed(Exception):
    """One solver of the chain did not deliver converged eigenpairs."""


def _residual_norms(L, values: np.ndarray, vectors: np.ndarray) -> np.ndarray:
    return np.linalg.norm(L @ vectors - vectors * values, axis=0)


def _laplacian_dense(L, k: int) -> tuple[np.ndarray, np.ndarray]:
    A = L.toarray() if scipy.sparse.issparse(L) else np.asarray(L, dtype=np.float64)
    return scipy.linalg.eigh(A, subset_by_index=(0, k - 1))


def _laplacian_arpack(
    L, k: int, rng: np.random.RandomState, scale: float
) -> tuple[np.ndarray, np.ndarray]:
    n = L.shape[0]
    if k >= n - 1:
        raise _SolverFailed(f"ARPACK needs k < n - 1, got k = {k} for n = {n}")
    v0 = rng.uniform(-1.0, 1.0, n)
    # Shift-invert just below 0: L - sigma I is positive definite, so its LU never meets the
    # exact zero eigenvalue of the Laplacian.
    try:
        values, vectors = scipy.sparse.linalg.eigsh(
            scipy.sparse.csc_matrix(L), k=k, sigma=-1e-5 * scale, which="LM", v0=v0
        )
    except (RuntimeError, scipy.sparse.linalg.ArpackError) as exc:
        raise _SolverFailed(f"ARPACK shift-invert failed: {exc}") from exc
    order = np.argsort(values)
    return values[order], vectors[:, order]


def _laplacian_amg(
    L,
    k: int,
    null_vector: np.ndarray | None,
    rng: np.random.RandomState,
    tol: float,
    accept: float,
    scale: float,
    maxiter: int,
) -> tuple[np.ndarray, np.ndarray]:
    import pyamg

    n = L.shape[0]
    known = 0 if null_vector is None else 1
    wanted = k - known
    # Extra block vectors cost more per iteration (measured on swiss-roll graphs) than they
    # save in iterations, so the block is just the wanted vectors.
    block = wanted
    if wanted == 0:
        return np.zeros(1), null_vector[:, None].copy()
    if n < _LOBPCG_MIN_NODES_PER_VECTOR * (block + known):
        raise _SolverFailed(
            f"LOBPCG is unreliable for {n} nodes and {block + known} vectors (it needs at least "
            f"{_LOBPCG_MIN_NODES_PER_VECTOR} nodes per vector)"
        )
    L = scipy.sparse.csr_matrix(L)
    # The Laplacian is singular; a multigrid hierarchy of a singular matrix is a poor
    # preconditioner, so it is built on a slightly shifted copy (the eigenproblem is not).
    shifted = L + scipy.sparse.identity(n, format="csr") * (1e-5 * scale)
    candidates = np.ones((n, 1)) if null_vector is None else null_vector[:, None]
    # "local" Jacobi weighting bounds the smoother by row sums instead of pyamg's randomized
    # spectral-radius estimate: a tenth of the set-up time, and repeatable without seeding
    # numpy's global generator.
    hierarchy = pyamg.smoothed_aggregation_solver(
        shifted, B=candidates, smooth=("jacobi", {"omega": 4.0 / 3.0, "weighting": "local"})
    )
    # A W-cycle costs little more than a V-cycle here (the coarse levels are small) and saves
    # about a quarter of the iterations to the tight target (measured: 15 against 20 on a
    # 100,000-point swiss roll).
    M = hierarchy.aspreconditioner(cycle="W")
    X0 = rng.standard_normal((n, block))
    Y = None if null_vector is None else null_vector[:, None]
    with warnings.catch_warnings():
        # LOBPCG warns when it stops short of `tol`; the residuals are checked below instead.
        warnings.simplefilter("ignore", UserWarning)
        values, vectors = scipy.sparse.linalg.lobpcg(
            L, X0, M=M, Y=Y, tol=tol, maxiter=maxiter, largest=False
        )
    order = np.argsort(values)[:wanted]
    values, vectors = values[order], vectors[:, order]
    worst = float(np.max(_residual_norms(L, values, vectors), initial=0.0))
    if not np.isfinite(worst) or worst > accept:
        raise _SolverFailed(
            f"AMG-preconditioned LOBPCG did not converge in {maxiter} iterations "
            f"(largest residual {worst:.2e}, tolerance {tol:.2e})"
        )
    if null_vector is not None:
        null = null_vector[:, None]
        values = np.concatenate([[float(null[:, 0] @ (L @ null[:, 0]))], values])
        vectors = np.hstack([null, vectors])
    return values, vectors


def smallest_laplacian_eigenpairs(
    L,
    k: int,
    *,
    null_vector: np.ndarray | None = None,
    solver: str = "auto",
    random_state=None,
    tol: float | None = None,
    maxiter: int = 200,
) -> EigenResult:
    """Return the ``k`` smallest eigenpairs of a graph Laplacian, trying solvers in turn.

    The chain is AMG-preconditioned LOBPCG (Knyazev 2001; the preconditioner a pyamg
    smoothed-aggregation hierarchy seeded with the Laplacian's known null vector), then
    shift-invert ARPACK, then a dense ``eigh`` for small n. Each fallback is announced by a
    :class:`SolverFallbackWarning` saying why the previous solver failed.

    Parameters
    ----------
    L : sparse matrix or ndarray of shape (n, n)
        A symmetric positive semi-definite Laplacian: D - W, or I - D^-1/2 W D^-1/2.
    k : int
        Number of eigenpairs, ``1 <= k <= n``, the null vector included.
    null_vector : ndarray of shape (n,), optional
        A known unit eigenvector for the eigenvalue 0: sqrt(degree) / |sqrt(degree)| for the
        normalized Laplacian, the constant vector for D - W. LOBPCG then searches only its
        orthogonal complement and the multigrid hierarchy is built to reproduce it.
    solver : {"auto", "amg", "arpack", "dense"}, default="auto"
        Where the chain starts. ``"auto"`` is ``"dense"`` for ``n <= DENSE_LIMIT`` and
        ``"amg"`` otherwise.
    random_state : int, RandomState or None
        Seeds the LOBPCG start block and the ARPACK start vector.
    tol : float, optional
        LOBPCG's residual tolerance (for unit vectors); default ``TARGET_RESIDUAL`` (1e-7)
        times the Laplacian's scale (its largest diagonal entry). A result within 10 x ``tol``
        is accepted; with the default, so is one that stops short of it but within the
        looser ``1e-5 * sqrt(n)`` x scale, rather than falling back to a far slower solver.
    maxiter : int, default=200
        LOBPCG's iteration limit.

    Returns
    -------
    EigenResult
        ``values`` in ascending order, ``vectors`` as columns with signs fixed, and
        ``solver``, the solver that produced them (``"amg"``, ``"arpack"`` or ``"dense"``).

    References
    ----------
    .. [1] A. V. Knyazev, "Toward the optimal preconditioned eigensolver: locally optimal
       block preconditioned conjugate gradient method", SIAM Journal on Scientific
       Computing 23 (2001), 517-541. https://doi.org/10.1137/S1064827500366124
    .. [2] P. Vanek, J. Mandel and M. Brezina, "Algebraic multigrid by smoothed aggregation
       for second and fourth order elliptic problems", Computing 56 (1996), 179-196.
       https://doi.org/10.1007/BF02238511
    """
    n = L.shape[0]
    if L.ndim != 2 or L.shape[1] != n:
        raise ValueError(f"`L` must be a square matrix, got shape {L.shape}")
    if not 1 <= k <= n:
        raise ValueError(f"`k` must satisfy 1 <= k <= n = {n}, got {k}")
    if solver not in LAPLACIAN_SOLVERS:
        raise ValueError(f"`solver` must be one of {LAPLACIAN_SOLVERS}, got {solver!r}")
    if null_vector is not None:
        null_vector = np.asarray(null_vector, dtype=np.float64).ravel()
        if null_vector.shape != (n,):
            raise ValueError(f"`null_vector` must have shape ({n},), got {null_vector.shape}")
        null_vector = null_vector / np.linalg.norm(null_vector)
    rng = check_random_state(random_state)
    diagonal = L.diagonal()
    scale = float(np.max(np.abs(diagonal))) if diagonal.size else 1.0
    scale = scale if scale > 0.0 else 1.0
    if tol is None:
        tol = TARGET_RESIDUAL * scale
        accept = max(10.0 * tol, LOOSE_RESIDUAL * np.sqrt(n) * scale)
    else:
        accept = 10.0 * tol
    if solver == "auto":
        solver = "dense" if n <= DENSE_LIMIT else "amg"
    chain = list(LAPLACIAN_SOLVERS[LAPLACIAN_SOLVERS.index(solver) :])
    reasons = []
    for name in chain:
        if name == "dense" and n > DENSE_FALLBACK_LIMIT:
            break
        try:
            if name == "amg":
                values, vectors = _laplacian_amg(
                    L, k, null_vector, rng, tol, accept, scale, maxiter
                )
            elif name == "arpack":
                values, vectors = _laplacian_arpack(L, k, rng, scale)
            else:
                values, vectors = _laplacian_dense(L, k)
        except _SolverFailed as exc:
            reasons.append(str(exc))
            following = chain[chain.index(name) + 1] if name != chain[-1] else None
            if following is not None and not (following == "dense" and n > DENSE_FALLBACK_LIMIT):
                warnings.warn(
                    f"{exc}; falling back to the '{following}' solver",
                    SolverFallbackWarning,
                    stacklevel=2,
                )
            continue
        vectors = fix_signs(np.ascontiguousarray(vectors))
        return EigenResult(np.asarray(values, dtype=np.float64), vectors, name)
    raise RuntimeError(
        f"no eigen-solver found the {k} smallest eigenpairs of the {n} x {n} Laplacian: "
        + "; ".join(reasons)
        + (
            f"; the dense solver is not tried above n = {DENSE_FALLBACK_LIMIT}"
            if n > DENSE_FALLBACK_LIMIT
            else ""
        )
    )
