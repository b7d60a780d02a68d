"""Stress axes shared by the generated families: density warping and the ambient lift."""

from __future__ import annotations

import numpy as np

__all__ = ["warp_uniform", "random_isometry", "lift"]


def warp_uniform(u: np.ndarray, density: float) -> np.ndarray:
    """Map uniform values on [0, 1] to a truncated exponential law on [0, 1].

    The result has density ``f(x) = a exp(a x) / (exp(a) - 1)`` with ``a = density``, so the
    sampling density at the end of the coordinate is ``exp(density)`` times that at its start
    (``density = 0`` leaves ``u`` unchanged; a negative value crowds the start instead). The
    map is the inverse of the law's CDF ``F(x) = (exp(a x) - 1) / (exp(a) - 1)``, so a grid
    stays a grid and a uniform sample becomes an exact sample of the law.
    """
    u = np.asarray(u, dtype=np.float64)
    if density == 0:
        return u
    a = float(density)
    return np.log1p(u * np.expm1(a)) / a


def random_isometry(rng: np.random.Generator, d: int, D: int) -> np.ndarray:
    """A D x d matrix with orthonormal columns, uniformly (Haar) distributed.

    QR of a Gaussian matrix with the signs of R's diagonal moved into Q gives the Haar
    measure on the Stiefel manifold (Mezzadri, Notices of the AMS 54, 2007).
    """
    gaussian = rng.standard_normal((D, d))
    q, r = np.linalg.qr(gaussian)
    signs = np.sign(np.diag(r))
    signs[signs == 0] = 1.0
    return q * signs


def lift(X: np.ndarray, ambient_dim: int | None, rng: np.random.Generator) -> np.ndarray:
    """Embed ``X`` (n x d) into ``ambient_dim`` dimensions by a random isometry.

    Pairwise distances are kept exactly (up to rounding); ``None`` or ``d`` returns ``X``.
    """
    d = X.shape[1]
    if ambient_dim is None or ambient_dim == d:
        return X
    return X @ random_isometry(rng, d, ambient_dim).T
