"""The least memory a job must hold at once, known before it runs, to refuse what cannot fit.

Each estimate is a floor, not a forecast: the one largest array a method cannot do without
(the n x n matrix of a dense kernel or distance method, the n x m landmark block, the k-nearest
neighbour graph) plus the data itself. When even the floor is over the suite's
``memory_limit``, the job can only end as ``memory``, so the suite is refused before anything
runs, with the estimate. Methods brought in with ``import`` have no floor here: they run and
stop at the limit, which the store records (status ``memory``, with ``n_samples``), since
where a peer stops is part of a scaling result.

Floors per built-in family (8 bytes per float64, 4 per int32 index):

- ``pca``: the data, n x D.
- ``classical_mds``, ``kernel_pca``: n x n without landmarks; with m landmarks the m x m
  landmark matrix and an n x d block of coordinates.
- ``laplacian_eigenmaps``, ``diffusion_maps`` (with ``n_neighbors``): the k-nearest-neighbour
  graph, n x k distances and indices; ``diffusion_maps`` without ``n_neighbors`` is dense.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from lowdim.errors import InputError
from lowdim.run.suites import Job

__all__ = ["Floor", "memory_floor", "check_memory"]

_FLOAT = 8
_INDEX = 4
_DENSE = ("classical_mds", "kernel_pca")
_GRAPH = ("laplacian_eigenmaps", "diffusion_maps")
# Ambient dimension of generated families when the spec does not lift them.
_NATIVE_DIM = 2


@dataclass(frozen=True)
class Floor:
    """The least memory a job needs (``bytes``) and what holds it (``what``)."""

    bytes: int
    what: str


def _params(job: Job) -> dict:
    from lowdim.methods import get_method

    defaults = get_method(job.method_spec["name"])().get_params(deep=False)
    return {**defaults, **job.method_params}


def memory_floor(job: Job) -> Floor | None:
    """The least memory ``job`` must hold at once, or None when it cannot be known beforehand.

    Known for the built-in methods on generated datasets (whose ``n`` is in the spec); a file's
    size is only known once it is read, and an imported method's needs are its own.
    """
    spec = job.dataset_spec
    name = job.method_spec.get("name")
    if name is None or "n" not in spec or "file" in spec:
        return None
    n = int(spec["n"])
    dim = int(spec.get("ambient_dim") or _NATIVE_DIM)
    data = _FLOAT * n * dim
    params = _params(job)
    k = job.n_components
    if name in _DENSE:
        m = params.get("n_landmarks")
        if m is None:
            return Floor(data + _FLOAT * n * n, f"its {n:,} x {n:,} matrix")
        m = min(int(m), n)
        return Floor(data + _FLOAT * (m * m + n * k), f"its {m:,} x {m:,} landmark matrix")
    if name in _GRAPH:
        neighbors = params.get("n_neighbors")
        if neighbors is None and name == "diffusion_maps":
            return Floor(data + _FLOAT * n * n, f"its dense {n:,} x {n:,} kernel")
        neighbors = min(int(neighbors or 10), n - 1)
        graph = (_FLOAT + _INDEX) * n * neighbors
        return Floor(data + graph, f"its {neighbors}-nearest-neighbour graph of {n:,} points")
    if name == "pca":
        return Floor(data, f"the {n:,} x {dim} data")
    return None


def _size(nbytes: float) -> str:
    for unit, scale in (("TB", 2**40), ("GB", 2**30), ("MB", 2**20)):
        if nbytes >= scale:
            return f"{nbytes / scale:.1f} {unit}"
    return f"{nbytes / 2**10:.0f} KB"


def check_memory(jobs: Iterable[Job], source: str = "the suite") -> None:
    """Refuse, with the estimate, a job whose memory floor is over its ``memory_limit``.

    Raises
    ------
    InputError
        Naming the first such job, what needs the memory and how much, and the limit.
    """
    for job in jobs:
        if job.memory_limit is None:
            continue
        floor = memory_floor(job)
        if floor is not None and floor.bytes > job.memory_limit:
            raise InputError(
                f"{source}: {job.method_label} on {job.dataset_label} cannot fit: {floor.what} "
                f"alone needs about {_size(floor.bytes)} (estimate), over the memory_limit of "
                f"{_size(job.memory_limit)}; raise `memory_limit`, lower `n` or use landmarks"
            )
