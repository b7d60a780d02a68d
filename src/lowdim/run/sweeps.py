"""The candidate configurations of ``lowdim compare``: which methods, with which grids.

Three sweeps, each a superset of the one before:

- ``quick``: every built-in method once or twice (the bandwidth rules, one data-scaled fixed
  bandwidth, 10 neighbours) — a first look;
- ``standard``: the bandwidth rules and four multiples of the data's median distance for the
  kernel methods, three neighbour counts for the graph methods, and the fast peers;
- ``full``: a wider bandwidth ladder, five neighbour counts, and every peer, slow ones
  included.

A fixed bandwidth is labelled as what it is, a multiple of the data's median distance:
``kernel_pca(bandwidth=4 × median distance (76.3))``, never a bare number the user did not
choose. Plugin methods and ``--with`` imports join every sweep with their defaults.
"""

from __future__ import annotations

from collections.abc import Sequence

from lowdim.errors import InputError, suggestion

__all__ = [
    "SWEEPS",
    "RULES",
    "BUILT_INS",
    "bandwidth_multiples",
    "neighbour_grid",
    "method_tables",
    "select_methods",
]

SWEEPS = ("quick", "standard", "full")
RULES = ("median", "local", "kernel_sum")
BUILT_INS = ("pca", "classical_mds", "kernel_pca", "laplacian_eigenmaps", "diffusion_maps")
_MULTIPLES = {
    "quick": (0.5,),
    "standard": (0.25, 0.5, 2.0, 4.0),
    "full": (0.125, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0),
}
_NEIGHBOURS = {"quick": (10,), "standard": (5, 10, 30), "full": (5, 10, 20, 30, 50)}


def bandwidth_multiples(sweep: str) -> tuple[float, ...]:
    """Multiples of the median distance tried as fixed bandwidths in ``sweep``."""
    return _MULTIPLES[sweep]


def neighbour_grid(sweep: str, n: int) -> list[int]:
    """Neighbour counts of ``sweep``, capped at ``n - 2`` so every graph method can run."""
    cap = max(1, n - 2)
    return sorted({min(k, cap) for k in _NEIGHBOURS[sweep]})


def _fixed(name: str, multiple: float, median: float, extra: dict) -> dict:
    value = float(f"{multiple * median:.3g}")
    return {
        "name": name,
        **extra,
        "bandwidth": value,
        "label": f"{name}(bandwidth={multiple:g} × median distance ({value:g}))",
    }


def _kernel_family(name: str, median: float, sweep: str, extra: dict, rules: Sequence[str]):
    tables = [{"name": name, "label": name, **extra, "grid": {"bandwidth": list(rules)}}]
    tables += [_fixed(name, m, median, extra) for m in bandwidth_multiples(sweep)]
    return tables


def method_tables(sweep: str, median: float, n: int) -> list[dict]:
    """The built-in methods' suite tables for ``sweep`` on ``n`` rows whose median distance
    is ``median``. A table's ``label`` equal to its name makes every display label
    ``name(swept=value)``, default values included."""
    if sweep not in SWEEPS:
        raise InputError(f"unknown sweep {sweep!r}; choose one of {', '.join(SWEEPS)}")
    ks = neighbour_grid(sweep, n)
    tables: list[dict] = [{"name": "pca"}, {"name": "classical_mds"}]
    tables += _kernel_family("kernel_pca", median, sweep, {"kernel": "rbf"}, RULES)
    tables.append(
        {
            "name": "laplacian_eigenmaps",
            "label": "laplacian_eigenmaps",
            "grid": {"n_neighbors": ks},
        }
    )
    rules = RULES[:2] if sweep == "quick" else RULES
    tables += _kernel_family("diffusion_maps", median, sweep, {}, rules)
    if sweep != "quick":
        tables.append(
            {
                "name": "diffusion_maps",
                "label": "diffusion_maps",
                "bandwidth": "median",
                "grid": {"n_neighbors": ks},
            }
        )
    return tables


def _family(table: dict) -> str:
    return str(table.get("name") or table.get("import"))


def select_methods(tables: list[dict], wanted: Sequence[str]) -> list[dict]:
    """Keep the tables of the methods named in ``wanted`` (``--methods``); all when empty.

    An unknown name is an error that lists the candidates and suggests the closest.
    """
    if not wanted:
        return tables
    names = list(dict.fromkeys(_family(t) for t in tables))
    for name in wanted:
        if name not in names:
            raise InputError(
                f"--methods names {name!r}, which is not among this comparison's candidates"
                f"{suggestion(name, names)}; choose from {', '.join(names)}"
            )
    return [t for t in tables if _family(t) in set(wanted)]
