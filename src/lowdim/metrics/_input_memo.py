"""The input side of scoring, kept across the embeddings of one data set.

A comparison scores some twenty embeddings of each resample of a file, one per job. Part of
each scoring depends on the input X alone: its nearest-neighbour lists, the ranks of its
pairwise distances on the pair subset, and each query row's ranks of all points for the
co-ranking matrix. A process that forks the jobs' children can compute those once
(:func:`prime`, which scores a stand-in embedding with the job's own settings) and the
children inherit them; :func:`lookup` finds them by the content of X, so a copy of the same
data finds them too, and other data never does. Nothing is kept unless a process asked for it,
so the public scoring functions behave as before. Every kept value is what the scorer
would compute with the same function on the same input, so the scores do not change (the
tests compare them number for number).
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from typing import Any

import numpy as np

__all__ = ["MAX_ROWS", "KEPT", "lookup", "keep", "prime", "forget"]

MAX_ROWS = 20_000
"""Inputs kept only up to this many rows (the lists alone are n x 128 integers)."""
KEPT = 4
"""Inputs kept per process, the most recently used."""

_MEMOS: OrderedDict[bytes, dict[Any, Any]] = OrderedDict()


def _key(X: np.ndarray) -> bytes:
    digest = hashlib.blake2b(digest_size=16)
    digest.update(repr((X.shape, X.dtype.str)).encode())
    digest.update(np.ascontiguousarray(X).data)
    return digest.digest()


def lookup(X: np.ndarray) -> dict[Any, Any] | None:
    """The kept input-side values of X (a dict to read and fill), or None."""
    if not _MEMOS or X.shape[0] > MAX_ROWS:
        return None
    key = _key(X)
    memo = _MEMOS.get(key)
    if memo is not None:
        _MEMOS.move_to_end(key)
    return memo


def keep(X: np.ndarray) -> dict[Any, Any] | None:
    """Start keeping X's input-side values in this process; None when X is too large."""
    if X.shape[0] > MAX_ROWS:
        return None
    key = _key(X)
    memo = _MEMOS.setdefault(key, {})
    _MEMOS.move_to_end(key)
    while len(_MEMOS) > KEPT:
        _MEMOS.popitem(last=False)
    return memo


def forget() -> None:
    """Drop everything kept in this process."""
    _MEMOS.clear()


def prime(X: Any, n_components: int = 2, **settings: Any) -> bool:
    """Compute and keep X's input-side values for scoring with ``settings``.

    ``settings`` are :func:`lowdim.metrics.score_embedding`'s keyword arguments as the jobs
    will pass them. X is scored against a stand-in embedding (its first columns); only the
    input side is kept. Returns whether anything is kept; a failure keeps nothing new and is
    left for the jobs to meet and report.
    """
    from lowdim.metrics._batch import score_embedding

    X = np.asarray(X, dtype=np.float64)
    if X.ndim != 2 or X.shape[0] > MAX_ROWS or keep(X) is None:
        return False
    stand_in = X[:, : max(1, min(n_components, X.shape[1]))]
    try:
        score_embedding(X, stand_in, **settings)
    except Exception:
        return False
    return True
