"""One front for the symmetric eigen-solvers the spectral methods use.

``top_eigenpairs`` returns the largest eigenpairs of a symmetric matrix with the solver chosen
for its size: LAPACK's ``eigh`` restricted to the wanted indices for small problems, ARPACK's
Lanczos (``eigsh``) for large or sparse ones, and a randomized subspace iteration (Halko,
Martinsson & Tropp, SIAM Review 53, 2011) when asked. Every solver's start is drawn from
``random_state`` and every result's signs are fixed by :func:`fix_signs`, so runs repeat.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg
from sklearn.utils import check_random_state

__all__ = ["EigenResult", "fix_signs", "top_eigenpairs", "DENSE_LIMIT"]

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
