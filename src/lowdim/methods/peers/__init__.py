"""The peers: scikit-learn's manifold learners and UMAP, ranked beside the spectral methods.

Each peer is a thin adapter around the class that implements it (scikit-learn's ``Isomap``,
``LocallyLinearEmbedding`` in its four forms, ``TSNE`` and ``MDS``; ``umap.UMAP`` from the
optional ``umap-learn`` package). ``fit`` checks the data and the parameters with the
project's wording, builds the underlying estimator with the same parameters, fits it and
keeps its ``embedding_``; nothing is recomputed, so a peer's embedding is the underlying
class's, number for number. The fitted estimator stays in ``estimator_``.

Out-of-sample ``transform`` exists where the underlying class has the method's own: Isomap,
standard LLE and UMAP. t-SNE and SMACOF embed only the rows they were fitted on. For modified
LLE, Hessian LLE and LTSA scikit-learn offers only standard LLE's barycentric interpolation,
which is not their method and does not reproduce their embedding of the training points
(Hessian and LTSA fail scikit-learn's own fit_transform / transform consistency check), so
their adapters have none either. A class without ``transform`` has no such method at all,
and :func:`lowdim.methods.has_transform` says so.

Each peer also carries what ``lowdim compare`` needs to sweep it: ``compare_grid`` (the
values tried) and ``cost_tier``: ``"fast"`` when one fit with the default settings takes at
most :data:`FAST_SECONDS` on a 700 x 50 table with one thread on the 2-core development
machine, else ``"slow"`` (``benchmarks/peers_cost.py`` measures it). :func:`peer_tables`
turns them into suite method tables whose every job can run on the rows at hand.
"""

from __future__ import annotations

from lowdim.errors import InputError
from lowdim.methods.peers._adapter import Peer
from lowdim.methods.peers.scikit_learn import (
    HessianLLEEmbedding,
    IsomapEmbedding,
    LLEEmbedding,
    LTSAEmbedding,
    ModifiedLLEEmbedding,
    SmacofMDS,
    TSNEEmbedding,
)
from lowdim.methods.peers.umap_learn import UMAPEmbedding

__all__ = [
    "IsomapEmbedding",
    "LLEEmbedding",
    "ModifiedLLEEmbedding",
    "HessianLLEEmbedding",
    "LTSAEmbedding",
    "TSNEEmbedding",
    "SmacofMDS",
    "UMAPEmbedding",
    "FAST_SECONDS",
    "COST_TIERS",
    "peer_names",
    "peer_tables",
]

# The tier rule: one fit with the default settings on a 700 x 50 table, one thread.
FAST_SECONDS = 2.0
COST_TIERS = ("fast", "slow")


def _peer_classes() -> dict[str, type[Peer]]:
    """Registry name -> adapter, in the registry's order (the names live in the registry)."""
    from lowdim.methods import _BUILTINS

    return {
        name: globals()[cls] for name, (module, cls) in _BUILTINS.items() if module == __name__
    }


def _capped_grid(cls: type[Peer], n_samples: int, n_components: int) -> dict[str, list]:
    """The peer's grid with every value moved into the range that runs on ``n_samples`` rows.

    Neighbour counts go into [min_neighbors(n_components), n_samples - 1]; perplexities
    below n_samples / 3 (the Barnes-Hut method looks at 3 x perplexity neighbours). A range
    that is empty gives an empty list.
    """
    grid: dict[str, list] = {}
    for key, values in cls.compare_grid.items():
        if key == "n_neighbors":
            low, high = cls.min_neighbors(n_components), n_samples - 1
        elif key == "perplexity":
            low, high = 1, (n_samples - 1) // 3
        else:
            raise RuntimeError(f"no capping rule for the compare grid key {key!r}")
        grid[key] = [] if low > high else sorted({min(max(v, low), high) for v in values})
    return grid


def peer_names() -> list[str]:
    """The registry names of the peers, in the order they are listed and swept."""
    return list(_peer_classes())


def peer_tables(
    tier: str,
    n_samples: int,
    installed_only: bool = True,
    *,
    n_components: int = 2,
    quick: bool = False,
) -> tuple[list[dict], list[tuple[str, str]]]:
    """Suite ``[[methods]]`` tables for the peers a comparison sweeps, and those left out.

    Parameters
    ----------
    tier : {"fast", "slow"}
        The costliest tier included: ``"fast"`` for the standard sweep, ``"slow"`` for every
        peer (the full sweep).
    n_samples : int
        Rows each job embeds; the grids are capped so that every job can run on them.
    installed_only : bool, default=True
        Leave out peers whose package is missing or too old (with the command that installs
        it); False plans them anyway.
    n_components : int, default=2
        Sets the smallest neighbour count of Hessian LLE, LTSA and modified LLE.
    quick : bool, default=False
        One setting per peer: the middle value of each grid (the lower of two).

    Returns
    -------
    tables : list of dict
        ``{"name": ..., "label": ..., "grid": {...}}`` (a label equal to the name makes every
        display label show its swept value), or ``{"name": ...}`` for a peer without a grid.
    left_out : list of (name, reason)
        Every peer not in ``tables``, with why in words.
    """
    if tier not in COST_TIERS:
        raise InputError(f"the peer tier must be one of {', '.join(COST_TIERS)}, got {tier!r}")
    allowed = COST_TIERS[: COST_TIERS.index(tier) + 1]
    tables: list[dict] = []
    left_out: list[tuple[str, str]] = []
    for name, cls in _peer_classes().items():
        reasons = []
        if cls.cost_tier not in allowed:
            reasons.append("slow tier: only in the full sweep")
        missing = cls.unavailable()
        if missing and (installed_only or reasons):
            reasons.append(missing)
        grid = _capped_grid(cls, n_samples, n_components)
        empty = [key for key, values in grid.items() if not values]
        if empty and not reasons:
            # the fewest rows that leave a value: n_neighbors < n, perplexity 1 < n / 3
            low = cls.min_neighbors(n_components) + 1 if "n_neighbors" in empty else 4
            reasons.append(f"needs at least {low} rows, the data has {n_samples}")
        if reasons:
            left_out.append((name, "; ".join(reasons)))
            continue
        if quick:
            grid = {key: [values[(len(values) - 1) // 2]] for key, values in grid.items()}
        tables.append({"name": name, "label": name, "grid": grid} if grid else {"name": name})
    return tables, left_out
