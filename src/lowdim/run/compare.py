"""Choosing a method for one's own data: the standard comparison on one file.

:func:`plan_comparison` reads the file once (every bad-input check happens there, before
anything is written), looks at the data (size, duplicate rows, neighbour-graph components,
the median distance that scales the bandwidth sweep) and builds a suite: the five built-in
methods with bandwidth and neighbour-count sweeps, the bandwidth rules among them, every
plugin method, over several seeds; a file with more rows than ``max_rows`` is compared on
repeated random subsamples of that size, one suite dataset per subsample.
:func:`run_comparison` runs it with the runner (which also builds the report) and turns the
scores into the ranked table and the recommendation (:mod:`lowdim.analysis.recommend`).
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from lowdim.errors import InputError

__all__ = [
    "MAX_ROWS",
    "ComparePlan",
    "plan_comparison",
    "run_comparison",
    "default_out_dir",
    "neighbour_counts",
    "median_distance",
]

MAX_ROWS = 3000
# Multiples of the median pairwise distance tried as fixed bandwidths, beside the rules.
SCALES = (0.25, 0.5, 2.0, 4.0)
QUICK_SCALES = (0.5,)
RULES = ("median", "local", "kernel_sum")
NEIGHBOURS = (5, 10, 30)
QUICK_NEIGHBOURS = (10,)
SEEDS = (0, 1, 2)
QUICK_SEEDS = (0, 1)


@dataclass
class ComparePlan:
    """A comparison ready to run: the suite as a dict, where it goes, what was found.

    ``context`` is what the comparison found in the data (rows, duplicates, neighbour-graph
    components, subsampling, criteria that cannot be computed); the runner keeps it in the
    run's settings record, where the recommendation's cautions read it.
    """

    file: Path
    suite: dict
    out_dir: Path
    context: dict
    plugins: tuple[str, ...] = ()
    warnings: list[str] = field(default_factory=list)

    @property
    def n_settings(self) -> int:
        return sum(_points(t) for t in self.suite["methods"])

    @property
    def n_samples(self) -> int:
        return int(self.context["n_samples"])

    @property
    def subsample(self) -> int | None:
        return self.context.get("subsample")


def default_out_dir(path: str | Path) -> Path:
    """``results/compare-<file stem>/``, the stem reduced to letters, digits, ``_ . -``."""
    return Path("results") / f"compare-{_safe_name(Path(path).stem)}"


def _safe_name(text: str) -> str:
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_.-")
    return name or "data"


def _points(table: dict) -> int:
    sizes = [len(v) for v in table.get("grid", {}).values()]
    return int(np.prod(sizes)) if sizes else 1


def neighbour_counts(n: int, wanted: tuple[int, ...] = NEIGHBOURS) -> list[int]:
    """The neighbour counts to sweep, capped at ``n - 2`` so every graph method can run."""
    cap = max(1, n - 2)
    return sorted({min(k, cap) for k in wanted})


def criterion_ks(n: int, wanted: tuple[int, ...] = NEIGHBOURS) -> list[int]:
    """K values for the neighbourhood criteria: trustworthiness needs K < n / 2."""
    cap = max(1, (n - 1) // 2 - 1)
    return sorted({min(k, cap) for k in wanted})


def median_distance(X: np.ndarray, *, max_points: int = 1000, seed: int = 0) -> float:
    """Median Euclidean distance between distinct rows, on a sample of ``max_points`` rows.

    This is the "median" bandwidth rule's value (common practice), used to scale the fixed
    bandwidths of the sweep to the data.
    """
    from scipy.spatial.distance import pdist

    rng = np.random.default_rng(seed)
    rows = X if len(X) <= max_points else X[rng.choice(len(X), max_points, replace=False)]
    d = pdist(rows)
    d = d[d > 0]
    if d.size == 0:
        raise InputError(
            "every row of the data is the same point, so there is no structure to embed; "
            "check the file and the dropped columns"
        )
    return float(np.median(d))


def graph_components(X: np.ndarray, ks: list[int]) -> dict[int, int]:
    """Connected components of the symmetrised kNN graph for each K (sparse, via scipy)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from sklearn.neighbors import NearestNeighbors

    top = max(ks)
    index = NearestNeighbors(n_neighbors=min(top + 1, len(X))).fit(X)
    _, nbrs = index.kneighbors(X)
    out = {}
    for k in ks:
        cols = nbrs[:, 1 : k + 1].ravel()
        rows = np.repeat(np.arange(len(X)), nbrs[:, 1 : k + 1].shape[1])
        graph = coo_matrix((np.ones(cols.size), (rows, cols)), shape=(len(X), len(X)))
        out[k] = int(connected_components(graph, directed=True, connection="weak")[0])
    return out


def _round(value: float) -> float:
    return float(f"{value:.3g}")


def _method_tables(
    scale: float, ks: list[int], plugin_names: list[str], *, quick: bool
) -> list[dict]:
    numbers = [_round(m * scale) for m in (QUICK_SCALES if quick else SCALES)]
    bandwidths = [*RULES, *dict.fromkeys(numbers)]
    if quick:
        # Just enough to show each method and the rules: the kernel-graph sweep is left out.
        return [
            {"name": "pca"},
            {"name": "classical_mds"},
            {"name": "kernel_pca", "label": "kernel_pca", "grid": {"bandwidth": bandwidths}},
            {
                "name": "laplacian_eigenmaps",
                "label": "laplacian_eigenmaps",
                "grid": {"n_neighbors": ks},
            },
            {
                "name": "diffusion_maps",
                "label": "diffusion_maps",
                "grid": {"bandwidth": [*RULES[:2], numbers[0]]},
            },
            *({"name": name} for name in plugin_names),
        ]
    # A label equal to the name makes every display label "name(swept=value)", the default
    # values included, so the table and the sensitivity check see each bandwidth.
    tables: list[dict] = [
        {"name": "pca"},
        {"name": "classical_mds"},
        {
            "name": "kernel_pca",
            "label": "kernel_pca",
            "kernel": "rbf",
            "grid": {"bandwidth": bandwidths},
        },
        {
            "name": "laplacian_eigenmaps",
            "label": "laplacian_eigenmaps",
            "grid": {"n_neighbors": ks},
        },
        {"name": "diffusion_maps", "label": "diffusion_maps", "grid": {"bandwidth": bandwidths}},
        {
            "name": "diffusion_maps",
            "label": "diffusion_maps",
            "bandwidth": "median",
            "grid": {"n_neighbors": ks},
        },
    ]
    tables += [{"name": name} for name in plugin_names]
    return tables


def _dataset_tables(spec: dict, label: str, n: int, max_rows: int, repeats: int) -> list[dict]:
    if n <= max_rows:
        return [{**spec, "label": label}]
    return [
        {
            **spec,
            "subsample": max_rows,
            "subsample_seed": s,
            "label": f"{label} (subsample {s + 1} of {repeats})",
        }
        for s in range(repeats)
    ]


def _missing_criteria(has_labels: bool) -> dict[str, str]:
    from lowdim.metrics import get_metric, metric_names

    out = {}
    for name in metric_names():
        needs = getattr(get_metric(name), "needs", None) or ()
        needs = (needs,) if isinstance(needs, str) else tuple(needs)
        if "labels" in needs and not has_labels:
            out[name] = "they need class labels: pass --labels COLUMN"
        elif "truth" in needs:
            out[name] = "they need ground-truth coordinates, which a data file does not have"
    return out


def plan_comparison(
    path: str | Path,
    *,
    labels: str | None = None,
    drop: list[str] | tuple[str, ...] = (),
    plugins: list[str] | tuple[str, ...] = (),
    out_dir: str | Path | None = None,
    quick: bool = False,
    max_rows: int = MAX_ROWS,
) -> ComparePlan:
    """Read ``path``, look at the data and build the comparison suite.

    Parameters
    ----------
    path : path
        The data file (any format :func:`lowdim.datasets.load` reads).
    labels, drop : optional
        A label column, and columns to leave out.
    plugins : sequence of paths
        Plugin files (already loaded); each method they register joins the comparison.
    out_dir : path, optional
        Results folder; default :func:`default_out_dir`.
    quick : bool, default=False
        A smaller sweep for a first look: 2 seeds, one fixed bandwidth beside the rules for
        kernel PCA, 10 neighbours, two rules and the number for diffusion maps.
    max_rows : int, default=3000
        Larger files are compared on 3 random subsamples of this many rows.

    Returns
    -------
    ComparePlan
    """
    from lowdim import datasets
    from lowdim.methods import load_plugin

    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 10:
        raise InputError(f"--max-rows must be an integer of at least 10, got {max_rows!r}")
    path = Path(path)
    spec: dict[str, Any] = {"file": str(path.resolve())}
    if labels:
        spec["labels"] = labels
    if drop:
        spec["drop"] = list(drop)
    if not path.exists():
        raise InputError(f"data file {str(path)!r} not found; give the path to a data file")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        dataset = datasets.load(spec)
    notes = [" ".join(str(w.message).split()) for w in caught]
    X = dataset.X
    n = dataset.n_samples
    if n < 4:
        raise InputError(
            f"the data file {str(path)!r} has {n} rows; a comparison needs at least 4 (and "
            "some dozens to mean much)"
        )
    unique = np.unique(X, axis=0).shape[0]
    if unique == 1:
        raise InputError(
            f"every row of {str(path)!r} is the same point, so there is no structure to "
            "embed; check the file and the dropped columns"
        )
    n_used = min(n, max_rows)
    rng = np.random.default_rng(0)
    sample = X if n <= max_rows else X[rng.choice(n, max_rows, replace=False)]
    ks = neighbour_counts(n_used, QUICK_NEIGHBOURS if quick else NEIGHBOURS)
    metric_ks = criterion_ks(n_used, QUICK_NEIGHBOURS if quick else NEIGHBOURS)
    plugin_names = sorted({name for p in plugins for name in load_plugin(p)})
    repeats = 2 if quick else 3
    suite = {
        "suite": {
            "name": f"compare-{_safe_name(path.stem)}",
            "n_components": 2,
            # Subsamples vary the data, so one method seed each is enough there.
            "seeds": [0] if n > max_rows else list(QUICK_SEEDS if quick else SEEDS),
            "neighbors": metric_ks,
            "description": f"lowdim compare on {path.name}",
        },
        "datasets": _dataset_tables(spec, path.stem, n, max_rows, repeats),
        "methods": _method_tables(median_distance(sample), ks, plugin_names, quick=quick),
    }
    context = {
        "file": path.name,
        "n_samples": n,
        "n_duplicates": n - unique,
        "components": {
            str(k): c for k, c in graph_components(sample, neighbour_counts(n_used)).items()
        },
        "subsample": max_rows if n > max_rows else None,
        "missing": _missing_criteria(dataset.labels is not None),
    }
    return ComparePlan(
        file=path,
        suite=suite,
        out_dir=Path(out_dir) if out_dir else default_out_dir(path),
        context=context,
        plugins=tuple(plugins),
        warnings=notes,
    )


def run_comparison(plan: ComparePlan, *, n_jobs: int = 1, quiet: bool = False) -> Any:
    """Run the plan's suite into its folder, its context kept in the settings record; return
    the runner's summary."""
    from lowdim.run.runner import run_suite
    from lowdim.run.suites import suite_from_dict

    suite = suite_from_dict(plan.suite, source=f"<lowdim compare {plan.file.name}>")
    return run_suite(
        suite,
        plan.out_dir,
        n_jobs=n_jobs,
        quiet=quiet,
        plugins=plan.plugins,
        context=plan.context,
    )
