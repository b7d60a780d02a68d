"""A rough estimate of the memory a job's work needs, so the suite check can refuse in advance
a dataset size that cannot fit in the suite's ``memory_limit``.

The estimate counts only the large arrays whose size is known from the suite alone, at
8 bytes per float64 value:

- the data, three times over (the table as read, the float64 matrix, the method's own
  validated copy): 3 x 8 x n x D;
- the dense n x n matrices of the built-in methods: kernel PCA without ``n_landmarks`` (the
  kernel, and a second copy for the dense eigensolver), classical MDS on precomputed
  dissimilarities without ``n_landmarks`` (the squared dissimilarities and their centred
  copy), diffusion maps with ``n_neighbors = None`` (the squared distances and the kernel),
  and the dense copy of the graph that ``eigen_solver = "dense"`` makes for Laplacian
  eigenmaps or diffusion maps.

Everything else (neighbour lists, eigensolver workspaces, the scorer's blocks, the
interpreter itself) is left out, so the estimate is a lower bound: a suite it refuses cannot
run, a suite it passes may still stop at the limit. Imported methods are counted for their data
only, since nothing is known of their inner workings.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["MemoryNeed", "memory_need", "format_bytes"]

_FLOAT = 8  # bytes per float64 value
_DATA_COPIES = 3


@dataclass(frozen=True)
class MemoryNeed:
    """Estimated bytes, what they are for in words, and how to need less."""

    nbytes: int
    what: str
    remedy: str


def format_bytes(nbytes: float) -> str:
    """``"6.7 GB"``, in binary units as :func:`lowdim.run.suites.parse_memory` reads them."""
    for unit, size in (("TB", 2**40), ("GB", 2**30), ("MB", 2**20), ("KB", 2**10)):
        if nbytes >= size:
            return f"{nbytes / size:.1f} {unit}"
    return f"{int(nbytes)} B"


def _dense_copies(method: str, params: dict) -> tuple[int, str, str]:
    """How many dense n x n float64 matrices a built-in method holds, what they are, the fix."""
    if method == "kernel_pca" and params.get("n_landmarks") is None:
        copies = 2 if str(params.get("solver", "auto")).lower() == "dense" else 1
        return copies, "the dense n x n kernel matrix", "set `n_landmarks` (Nyström)"
    if (
        method == "classical_mds"
        and str(params.get("metric", "euclidean")).lower() == "precomputed"
        and params.get("n_landmarks") is None
    ):
        return (
            2,
            "the n x n squared dissimilarities and their centred copy",
            ("set `n_landmarks` (landmark MDS)"),
        )
    copies, what, remedy = 0, "", ""
    if method == "diffusion_maps" and params.get("n_neighbors") is None:
        copies, what = 2, "the dense n x n distances and kernel"
        remedy = "set `n_neighbors` for a sparse kNN kernel"
    if method in ("laplacian_eigenmaps", "diffusion_maps") and (
        str(params.get("eigen_solver", "auto")).lower() == "dense"
    ):
        copies += 1
        what = f"{what} and " if what else ""
        what += "the dense n x n copy for eigen_solver = 'dense'"
        remedy = f"{remedy} or " if remedy else ""
        remedy += "use eigen_solver = 'auto'"
    return copies, what, remedy


def memory_need(method: str | None, params: dict, n: int, d: int) -> MemoryNeed:
    """The estimated memory of one job: ``method`` (a built-in name, or None for an import)
    with its full parameters (defaults filled in) on ``n`` rows of ``d`` columns."""
    data = _DATA_COPIES * _FLOAT * n * d
    copies, what, remedy = _dense_copies(method, params) if method else (0, "", "")
    if not copies:
        return MemoryNeed(
            data, f"the data ({_DATA_COPIES} x 8 bytes x n x D)", "use fewer rows or columns"
        )
    return MemoryNeed(
        data + copies * _FLOAT * n * n,
        f"{what} ({copies} x 8 bytes x n^2, besides the data)",
        remedy,
    )
