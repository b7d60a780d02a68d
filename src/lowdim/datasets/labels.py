"""Label schemes over the intrinsic coordinates of generated data.

``"checker:AxB"`` cuts the first two intrinsic coordinates into an A x B grid of cells and
colours them like a chessboard (two classes), as in the label protocol of van der Maaten,
Postma & van den Herik (TiCC TR 2009-005), which labels its artificial sets by a two-class
checkerboard over the manifold parameters. ``"bands:N"`` cuts the first coordinate into N
equal bands (N classes). ``"classes"`` gives the family's own classes (the moon, the circle,
the blob, the piece of the roll with a gap), ``"none"`` no labels. A scheme of one cell
(``"checker:1x1"``, ``"bands:1"``) is refused: a single class cannot tell methods apart.

The cuts are made on the *unit* coordinates (each generating parameter on [0, 1]), so the
cells are fixed by the recipe, not by where the sample happens to fall.
"""

from __future__ import annotations

import re

import numpy as np

from lowdim._validation import Pattern

__all__ = ["SCHEME", "parse_scheme", "scheme_problem", "make_labels"]

SCHEME = Pattern(
    r"none|classes|checker:[1-9]\d*x[1-9]\d*|bands:[1-9]\d*",
    "'none', 'classes', 'checker:AxB' or 'bands:N' (A, B, N positive ints)",
)


def parse_scheme(scheme: str) -> tuple[str, tuple[int, ...]]:
    """``"checker:5x3"`` -> ``("checker", (5, 3))``; ``"bands:4"`` -> ``("bands", (4,))``."""
    scheme = scheme.lower()
    match = re.fullmatch(r"checker:(\d+)x(\d+)", scheme)
    if match:
        return "checker", (int(match.group(1)), int(match.group(2)))
    match = re.fullmatch(r"bands:(\d+)", scheme)
    if match:
        return "bands", (int(match.group(1)),)
    return scheme, ()


def scheme_problem(scheme: str, *, intrinsic_dim: int, has_classes: bool) -> str | None:
    """Why ``scheme`` does not fit a family, as a phrase, or None when it fits."""
    kind, sizes = parse_scheme(scheme)
    if kind in ("checker", "bands") and all(size == 1 for size in sizes):
        return (
            f"{scheme!r} gives every point the same label, which cannot tell methods apart; "
            "use at least two cells, e.g. 'checker:2x2' or 'bands:2'"
        )
    if kind == "classes" and not has_classes:
        return "this dataset has no natural classes; use 'checker:AxB' or 'bands:N'"
    if kind == "checker" and intrinsic_dim < 2:
        return (
            f"a checkerboard needs two intrinsic coordinates and this dataset has "
            f"{intrinsic_dim}; use 'bands:N'"
        )
    if kind == "bands" and intrinsic_dim < 1:
        return "this dataset has no intrinsic coordinates to cut into bands; use 'classes'"
    return None


def _cells(values: np.ndarray, count: int) -> np.ndarray:
    # A value of exactly 1.0 belongs to the last cell, not to a cell past the end.
    return np.minimum((values * count).astype(np.int64), count - 1)


def make_labels(
    scheme: str, unit: np.ndarray | None, classes: np.ndarray | None
) -> np.ndarray | None:
    """Labels for ``scheme`` from the unit coordinates (n x d, on [0, 1]) or the classes."""
    kind, sizes = parse_scheme(scheme)
    if kind == "none":
        return None
    if kind == "classes":
        return None if classes is None else np.asarray(classes, dtype=np.int64)
    if kind == "bands":
        return _cells(unit[:, 0], sizes[0])
    columns, rows = sizes
    return (_cells(unit[:, 0], columns) + _cells(unit[:, 1], rows)) % 2
