"""Choosing a method for one's own data: the comparison of one file, planned.

:func:`plan_comparison` reads the file (every bad-input check happens there, before anything
is written), reports what it sees in the columns (:mod:`lowdim.run.columns`), looks at the
data (size, duplicate rows, neighbour-graph components, the median distance that scales the
bandwidth sweep) and builds a suite: the candidate configurations of the chosen sweep
(:mod:`lowdim.run.sweeps`), over repeated random subsamples of the file's rows.

The subsamples are the blocks of every test: :data:`RESAMPLES` draws of :data:`FRACTION` of
the rows without replacement (at most ``max_rows`` each), each drawn with its own seed, so a
deterministic method gets a spread from the data itself. Within a subsample each
configuration runs with the sweep's seeds (one in the quick and standard sweeps, three in the
full one), which vary the stochastic methods. A subsample repeats no row, unlike a bootstrap
sample, so neighbourhood criteria never see zero distances (REFERENCES.md, common practice).
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from lowdim.errors import InputError
from lowdim.run.columns import column_findings
from lowdim.run.sweeps import SWEEPS, method_tables, neighbour_grid, select_methods

__all__ = [
    "MAX_ROWS",
    "file_spec",
    "FRACTION",
    "RESAMPLES",
    "SCALES",
    "CompareOptions",
    "ComparePlan",
    "plan_comparison",
    "run_comparison",
    "default_out_dir",
    "criterion_ks",
    "median_distance",
    "graph_components",
]

MAX_ROWS = 3000
FRACTION = 0.8
RESAMPLES = {"quick": 3, "standard": 5, "full": 5}
_SEEDS = {"quick": (0,), "standard": (0,), "full": (0, 1, 2)}
_CRITERION_KS = (5, 10, 30)
# What a comparison shows: its headline criteria (the registry's defaults that a data file can
# have) and the R_NX(K) curve; scoring nothing else keeps each job short.
COMPARE_METRICS = (
    "trustworthiness",
    "continuity",
    "rnx",
    "rnx_auc",
    "knn_accuracy",
    "distance_spearman",
)
SCALES = ("none", "standard", "robust", "minmax")


@dataclass(frozen=True)
class CompareOptions:
    """What the user chose on the command line (``lowdim compare --help`` words each one).

    ``keep`` columns are carried into every output (the ``embed`` command) and never used as
    features; ``extra`` are ``module:Class`` transformers added as candidates (``--with``);
    ``methods`` restricts the candidates to these method names (``--methods``).
    """

    labels: str | None = None
    features: tuple[str, ...] = ()
    drop: tuple[str, ...] = ()
    keep: tuple[str, ...] = ()
    scale: str = "none"
    log1p: bool = False
    pca_first: int | None = None
    n_components: int = 2
    sweep: str = "standard"
    max_rows: int = MAX_ROWS
    methods: tuple[str, ...] = ()
    extra: tuple[str, ...] = ()


@dataclass
class ComparePlan:
    """A comparison ready to run: the suite as a dict, where it goes, what was found.

    ``context`` is what the comparison found in the data and chose to do (rows, columns,
    preprocessing, resampling, candidates, duplicates, graph components, criteria that cannot
    be computed); the runner keeps it in the run's settings record, where the report and the
    recommendation read it.
    """

    file: Path
    suite: dict
    out_dir: Path
    context: dict
    options: CompareOptions = field(default_factory=CompareOptions)
    plugins: tuple[str, ...] = ()
    warnings: list[str] = field(default_factory=list)
    checked: Any = None
    """``suite`` validated at planning time (a :class:`lowdim.run.suites.Suite`)."""

    @property
    def n_settings(self) -> int:
        return sum(_points(t) for t in self.suite["methods"])

    @property
    def n_samples(self) -> int:
        return int(self.context["n_samples"])

    @property
    def resample_size(self) -> int:
        return int(self.context["resample_size"])


def default_out_dir(path: str | Path) -> Path:
    """``results/compare-<file stem>/``, the stem reduced to letters, digits, ``_ . -``."""
    return Path("results") / f"compare-{_safe_name(Path(path).stem)}"


def _safe_name(text: str) -> str:
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_.-")
    return name or "data"


def _points(table: dict) -> int:
    sizes = [len(v) for v in table.get("grid", {}).values()]
    return int(np.prod(sizes)) if sizes else 1


def criterion_ks(n: int, wanted: tuple[int, ...] = _CRITERION_KS) -> list[int]:
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


def _missing_criteria(has_labels: bool, label_column: str | None) -> dict[str, str]:
    from lowdim.metrics import get_metric, metric_names

    no_labels = (
        f"the label column {label_column!r} has fewer than two classes to tell apart"
        if label_column
        else "they need class labels: pass --labels COLUMN"
    )
    out = {}
    for name in metric_names():
        needs = get_metric(name).needs
        if needs == "labels" and not has_labels:
            out[name] = no_labels
        elif needs == "truth":
            out[name] = "they need ground-truth coordinates, which a data file does not have"
    return out


def _check_options(options: CompareOptions) -> None:
    if options.sweep not in SWEEPS:
        raise InputError(f"unknown sweep {options.sweep!r}; choose one of {', '.join(SWEEPS)}")
    max_rows = options.max_rows
    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 10:
        raise InputError(f"--max-rows must be an integer of at least 10, got {max_rows!r}")
    if options.scale not in SCALES:
        raise InputError(
            f"--scale must be one of {', '.join(SCALES)}, got {options.scale!r}; e.g. "
            "--scale standard"
        )
    for name, value, low in (
        ("--pca-first", options.pca_first, 2),
        ("--n-components", options.n_components, 1),
    ):
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, int) or value < low:
            raise InputError(f"{name} must be an integer of at least {low}, got {value!r}")
    for target in options.extra:
        _check_import(target)
    both = set(options.keep) & set(options.features)
    if both:
        raise InputError(
            f"--keep and --features both name {', '.join(sorted(both))}; a kept column is "
            "carried into the output and never used as a feature"
        )


def file_spec(
    file: str,
    *,
    labels: str | None = None,
    features: Sequence[str] = (),
    drop: Sequence[str] = (),
    keep: Sequence[str] = (),
    scale: str = "none",
    log1p: bool = False,
    pca_first: int | None = None,
) -> dict[str, Any]:
    """A data file's dataset spec from the command line's column and preprocessing options,
    the same for ``compare`` and ``embed``: ``keep`` columns are never features (``embed``
    carries them into its output)."""
    spec: dict[str, Any] = {"file": file}
    if labels:
        spec["labels"] = labels
    for key, columns in (("features", features), ("drop", drop), ("keep", keep)):
        if columns:
            spec[key] = list(columns)
    if scale != "none":
        spec["scale"] = scale
    if log1p:
        spec["log1p"] = True
    if pca_first is not None:
        spec["pca_first"] = pca_first
    return spec


def _spec(path: Path, options: CompareOptions, *, preprocessing: bool) -> dict[str, Any]:
    """The compared file's dataset spec, with or without the preprocessing options."""
    columns = {"features": options.features, "drop": options.drop, "keep": options.keep}
    if preprocessing:
        steps = {"scale": options.scale, "log1p": options.log1p, "pca_first": options.pca_first}
    else:
        steps = {}
    return file_spec(str(path.resolve()), labels=options.labels, **columns, **steps)


def _load(spec: dict, *, check_scale: bool = True) -> tuple[Any, list[str]]:
    from lowdim import datasets

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        dataset = datasets.load(spec, check_scale=check_scale)
    return dataset, [" ".join(str(w.message).split()) for w in caught]


def _candidates(
    options: CompareOptions, median: float, n: int, plugin_names: list[str]
) -> tuple[list[dict], list[tuple[str, str]]]:
    """The sweep's tables (the built-ins, then the peers: the fast ones in the quick and
    standard sweeps, every one in the full sweep), the plugins' and the ``--with`` imports,
    then ``--methods``."""
    from lowdim.methods.peers import peer_tables

    tables = method_tables(options.sweep, median, n)
    shape = {"n_components": options.n_components, "quick": options.sweep == "quick"}
    peers, left_out = peer_tables("slow" if options.sweep == "full" else "fast", n, **shape)
    named = {name for name, _ in left_out} & set(options.methods)
    if named:
        # A peer named in --methods joins whatever its tier; one that cannot run here is an
        # error that says why (the package to install, the rows it needs).
        every, cannot = peer_tables("slow", n, **shape)
        for name, why in cannot:
            if name in named:
                raise InputError(f"--methods names {name!r}, which cannot run here: {why}")
        peers = [t for t in every if t in peers or t["name"] in named]
        left_out = [(name, why) for name, why in left_out if name not in named]
    tables += peers
    tables += [{"name": name} for name in plugin_names]
    for target in options.extra:
        tables.append({"import": target, "label": target.rpartition(":")[2]})
    return select_methods(tables, options.methods), left_out


def plan_comparison(
    path: str | Path,
    options: CompareOptions | None = None,
    *,
    plugins: list[str] | tuple[str, ...] = (),
    out_dir: str | Path | None = None,
) -> ComparePlan:
    """Read ``path``, look at its columns and rows, and build the comparison suite.

    Parameters
    ----------
    path : path
        The data file (any format :func:`lowdim.datasets.load` reads).
    options : CompareOptions, optional
        Columns, preprocessing, sweep, candidates.
    plugins : sequence of paths
        Plugin files (already loaded); each method they register joins the comparison.
    out_dir : path, optional
        Results folder; default :func:`default_out_dir`.

    Returns
    -------
    ComparePlan
    """
    from lowdim.methods import load_plugin

    options = options or CompareOptions()
    _check_options(options)
    path = Path(path)
    if not path.exists():
        raise InputError(f"data file {str(path)!r} not found; give the path to a data file")
    dataset, notes = _load(_spec(path, options, preprocessing=True))
    # The raw columns feed only the column findings; the methods see the preprocessed values.
    raw, _ = _load(_spec(path, options, preprocessing=False), check_scale=False)
    if raw.n_features < 2:
        kept = ", ".join(repr(c) for c in raw.meta.get("columns", []))
        raise InputError(
            f"the data file {str(path)!r} has one feature column ({kept}) once the label, "
            "dropped, kept and constant columns are set aside; comparing methods needs at least "
            "two, since from one column every method can only return its order; check "
            "--labels, --drop and --keep"
        )
    X = dataset.X
    n = dataset.n_samples
    if n < 8:
        raise InputError(
            f"the data file {str(path)!r} has {n} rows; a comparison needs at least 8 (and "
            "some dozens to mean much)"
        )
    unique = np.unique(X, axis=0).shape[0]
    if unique == 1:
        raise InputError(
            f"every row of {str(path)!r} is the same point, so there is no structure to "
            "embed; check the file and the dropped columns"
        )
    if options.n_components >= n:
        raise InputError(f"--n-components {options.n_components} must be below the {n} rows")
    findings = column_findings(
        raw.X,
        raw.meta.get("columns", []),
        dropped=raw.meta.get("dropped_columns", []),
        scale=options.scale,
        log1p=options.log1p,
    )
    size = max(4, min(int(round(FRACTION * n)), options.max_rows))
    repeats = RESAMPLES[options.sweep]
    rng = np.random.default_rng(0)
    sample = X if n <= size else X[np.sort(rng.choice(n, size, replace=False))]
    median = median_distance(sample)
    plugin_names = sorted({name for p in plugins for name in load_plugin(p)})
    methods, left_out = _candidates(options, median, size, plugin_names)
    spec = _spec(path, options, preprocessing=True)
    datasets = [
        {
            **spec,
            "subsample": size,
            "subsample_seed": s,
            "label": f"{path.stem} (resample {s + 1} of {repeats})",
        }
        for s in range(repeats)
    ]
    suite = {
        "suite": {
            "name": f"compare-{_safe_name(path.stem)}",
            "n_components": options.n_components,
            "seeds": list(_SEEDS[options.sweep]),
            "neighbors": criterion_ks(size),
            "metrics": list(COMPARE_METRICS),
            "description": f"lowdim compare on {path.name}",
        },
        "datasets": datasets,
        "methods": methods,
    }
    families = list(dict.fromkeys(str(t.get("name") or t.get("import")) for t in methods))
    context = {
        "file": path.name,
        "path": str(path.resolve()),
        "n_samples": n,
        "n_features": int(raw.n_features),
        "columns": list(raw.meta.get("columns", [])),
        "findings": findings,
        "options": {
            "labels": options.labels,
            "features": list(options.features),
            "drop": list(options.drop),
            "keep": list(options.keep),
            "scale": options.scale,
            "log1p": options.log1p,
            "pca_first": options.pca_first,
            "n_components": options.n_components,
        },
        "sweep": options.sweep,
        "resamples": repeats,
        "resample_size": size,
        "fraction": FRACTION,
        "seeds": list(_SEEDS[options.sweep]),
        "median_distance": median,
        "candidates": families,
        "left_out": [list(item) for item in left_out],
        "n_duplicates": n - unique,
        "components": {
            str(k): c
            for k, c in graph_components(sample, neighbour_grid("standard", size)).items()
        },
        "missing": _missing_criteria(dataset.labels is not None, options.labels),
    }
    from lowdim.run.suites import suite_from_dict

    # The whole suite check now, before any folder is made: a mistake is one line and
    # nothing is written.
    checked = suite_from_dict(suite, source=f"<lowdim compare {path.name}>")
    return ComparePlan(
        file=path,
        suite=suite,
        out_dir=Path(out_dir) if out_dir else default_out_dir(path),
        context=context,
        options=options,
        plugins=tuple(plugins),
        warnings=notes,
        checked=checked,
    )


def _check_import(target: str) -> None:
    """A ``--with`` target must import and be a transformer class."""
    from lowdim.methods import import_object
    from lowdim.run.suite_checks import transformer_problem

    if ":" not in target:
        raise InputError(
            f"--with {target!r} must name a class as module:Class, e.g. "
            "--with sklearn.manifold:Isomap"
        )
    try:
        obj = import_object(target)
    except InputError as exc:
        raise InputError(f"--with: {exc}") from None
    problem = transformer_problem(obj) if isinstance(obj, type) else "is not a class"
    if problem:
        raise InputError(f"--with {target!r} {problem}")


def run_comparison(plan: ComparePlan, *, n_jobs: int = 1, quiet: bool = False) -> Any:
    """Run the plan's suite into its folder, its context kept in the settings record, the
    resamples as the blocks of the tests; return the runner's summary."""
    from lowdim.run.runner import run_suite

    return run_suite(
        plan.checked,
        plan.out_dir,
        n_jobs=n_jobs,
        quiet=quiet,
        plugins=plan.plugins,
        context=plan.context,
        blocks="resamples",
    )
