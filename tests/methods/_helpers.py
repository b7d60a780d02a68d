"""Assertions shared by the method tests."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose


def assert_allclose_up_to_sign(
    actual: np.ndarray, desired: np.ndarray, *, rtol: float = 1e-7, atol: float = 0.0
) -> None:
    """Assert two embeddings agree column by column, each column up to a sign flip.

    An eigenvector is defined only up to sign, so two correct solvers may disagree on it; the
    sign of each column of ``actual`` is aligned with ``desired`` by their inner product.
    """
    actual = np.asarray(actual, dtype=np.float64)
    desired = np.asarray(desired, dtype=np.float64)
    if actual.ndim == 1:
        actual, desired = actual[:, None], desired[:, None]
    assert actual.shape == desired.shape, f"shapes differ: {actual.shape} != {desired.shape}"
    signs = np.sign(np.einsum("ij,ij->j", actual, desired))
    signs[signs == 0] = 1.0
    assert_allclose(actual * signs, desired, rtol=rtol, atol=atol)
