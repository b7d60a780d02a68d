"""Suites: a TOML file becomes a validated :class:`Suite`, then a list of :class:`Job`.

A suite names datasets, methods, seeds and the criteria to compute. Lists under ``grid.`` are
swept (the cartesian product within one table); everything else is fixed. Everything is checked
before anything runs, and every error names the file, the table (``the 3rd [[methods]]``), the
key and the closest valid name.

A job is one (dataset spec, method spec, seed, n_components). Its id hashes the job's canonical
JSON together with the lowdim version and, for a file dataset, the file's content, so a rerun
finds finished jobs again and any change to a parameter, a file or lowdim makes new ones.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from lowdim import __version__
from lowdim.errors import InputError, suggestion
from lowdim.run.published import read_published
from lowdim.run.suite_checks import check_construction, check_memory, file_size, method_defaults

__all__ = ["Job", "Suite", "load_suite", "suite_from_dict", "parse_memory", "ordinal"]

SUITE_KEYS = (
    "name",
    "n_components",
    "seeds",
    "neighbors",
    "timeout",
    "memory_limit",
    "metrics",
    "headline",
    "select",
    "alpha",
    "threads",
    "description",
    "published",
    "unprinted",
)
TOP_KEYS = ("suite", "datasets", "methods")
DEFAULTS: dict[str, Any] = {
    "n_components": 2,
    "seeds": (0,),
    "neighbors": (5, 10, 30),
    "timeout": 600.0,
    "memory_limit": None,
    "metrics": None,
    "headline": None,
    "select": "overall",
    "alpha": 0.05,
    "threads": 1,
    "description": "",
    "published": (),
    "unprinted": (),
}
# Criteria the runner measures itself; they are stored as scores but never asked of the scorer.
RUNNER_METRICS = ("fit_seconds", "peak_mb")
_UNITS = {"": 1, "b": 1, "kb": 2**10, "mb": 2**20, "gb": 2**30, "tb": 2**40}
_UNITS.update({"kib": 2**10, "mib": 2**20, "gib": 2**30, "tib": 2**40})


@dataclass(frozen=True)
class Job:
    """One dataset, one method, one seed: the unit the runner executes and the store keeps.

    ``dataset_spec`` is the normalised dataset spec with the job's ``seed`` in it (unless the
    suite fixed its own); ``method_spec`` is ``{"name": ...}`` or ``{"import": ...}`` plus the
    method's parameters as the suite wrote them. The runner adds ``n_components`` and
    ``random_state`` where the estimator has them. ``memory_limit`` is in bytes (None: none).
    ``data_sha256`` is the content hash of a file dataset, so that a worker on another machine
    can tell that it reads the same file.
    """

    job_id: str
    dataset_spec: dict
    dataset_label: str
    method_spec: dict
    method_label: str
    seed: int
    n_components: int
    neighbors: tuple[int, ...]
    metrics: tuple[str, ...] | None
    timeout: float | None
    memory_limit: int | None
    threads: int = 1
    data_sha256: str | None = None

    @property
    def method_params(self) -> dict:
        """The method's parameters without ``name`` / ``import``."""
        return {k: v for k, v in self.method_spec.items() if k not in ("name", "import")}

    @property
    def method_target(self) -> str:
        """The registry name or the import target."""
        return self.method_spec.get("name") or self.method_spec["import"]

    @property
    def dataset_target(self) -> str:
        """The registry name of the dataset, or its file path."""
        spec = self.dataset_spec
        if "openml" in spec:
            return f"openml:{spec['openml']}"
        return str(spec.get("name") or spec.get("file"))


@dataclass(frozen=True)
class Entry:
    """One point of a ``[[datasets]]`` or ``[[methods]]`` table's grid."""

    spec: dict
    label: str
    where: str
    id_spec: dict = field(default_factory=dict)
    # (rows, feature columns) of a file dataset as its header tells, for the memory check
    size: tuple[int | None, int | None] | None = None


@dataclass(frozen=True)
class Suite:
    """A validated suite: settings, dataset entries and method entries."""

    name: str
    source: str
    text: str
    n_components: int
    seeds: tuple[int, ...]
    neighbors: tuple[int, ...]
    timeout: float | None
    memory_limit: int | None
    metrics: tuple[str, ...] | None
    # the headline criteria as given: names, or "name@K" keys; empty for the defaults
    headline: tuple[str, ...]
    # what picks the winner: "overall" (every headline criterion) or one criterion
    select: str
    alpha: float
    threads: int
    description: str
    datasets: tuple[Entry, ...]
    methods: tuple[Entry, ...]
    # published figures to set beside the measured ones (lowdim.run.published) and the
    # settings the publication does not print
    published: tuple[dict, ...] = ()
    unprinted: tuple[str, ...] = ()

    def jobs(self) -> list[Job]:
        """Every (dataset, method, seed) job, dataset-major, with stable ids."""
        out = []
        for data, method, seed in itertools.product(self.datasets, self.methods, self.seeds):
            dataset_spec = dict(data.spec)
            dataset_spec.setdefault("seed", seed)
            id_spec = dict(data.id_spec)
            id_spec.setdefault("seed", seed)
            settings = {
                "dataset": id_spec,
                "method": method.spec,
                "seed": seed,
                "n_components": self.n_components,
                "neighbors": list(self.neighbors),
                "metrics": None if self.metrics is None else list(self.metrics),
                "lowdim": __version__,
            }
            out.append(
                Job(
                    job_id=job_hash(settings),
                    dataset_spec=dataset_spec,
                    dataset_label=data.label,
                    method_spec=dict(method.spec),
                    method_label=method.label,
                    seed=seed,
                    n_components=self.n_components,
                    neighbors=self.neighbors,
                    metrics=self.metrics,
                    timeout=self.timeout,
                    memory_limit=self.memory_limit,
                    threads=self.threads,
                    data_sha256=data.id_spec.get("file_sha256"),
                )
            )
        return out


def job_hash(settings: dict) -> str:
    """The first 16 hex digits of the sha256 of the canonical JSON of ``settings``."""
    text = json.dumps(settings, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def ordinal(n: int) -> str:
    """``1st``, ``2nd``, ``3rd``, ``11th``, ``22nd`` ..."""
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def load_suite(path: str | Path) -> Suite:
    """Read and validate the suite file at ``path``.

    Raises
    ------
    InputError
        When the file is missing or unreadable (a folder, a symlink loop, no permission), not
        UTF-8, not TOML (with the parser's line and column) or not a valid suite.
    """
    from lowdim.datasets.headers import check_readable

    path = Path(path)
    try:
        check_readable(path, f"the suite file {str(path)!r}")
    except FileNotFoundError:
        raise InputError(
            f"suite file {str(path)!r} not found; give the path to a .toml file"
        ) from None
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"the suite file {str(path)!r} is not UTF-8 text (byte offset {exc.start}); save "
            "it as UTF-8"
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {exc}; fix the file and run again") from None
    return suite_from_dict(data, source=str(path), text=text)


def suite_from_dict(data: dict, source: str = "<suite>", text: str | None = None) -> Suite:
    """Validate a suite given as a dict (the parsed TOML) and return it.

    File datasets are read relative to the folder of ``source`` and hashed now, so the job ids
    follow the file's content.
    """
    if not isinstance(data, dict):
        raise InputError(f"{source}: a suite must be a table, got {type(data).__name__}")
    for key in data:
        if key not in TOP_KEYS:
            raise InputError(
                f"{source}: unknown table [{key}]{suggestion(key, TOP_KEYS)}; a suite has "
                "[suite], [[datasets]] and [[methods]]"
            )
    settings = _check_settings(data.get("suite"), source)
    base = Path(source).parent if source and not source.startswith("<") else Path(".")
    if settings["published"]:
        settings["published"] = read_published(base / settings["published"], f"{source}: [suite]")
    datasets = _tables(data, "datasets", source)
    methods = _tables(data, "methods", source)
    dataset_entries = [
        entry
        for i, table in enumerate(datasets)
        for entry in _dataset_entries(table, f"{source}: the {ordinal(i + 1)} [[datasets]]", base)
    ]
    method_entries = [
        entry
        for i, table in enumerate(methods)
        for entry in _method_entries(table, f"{source}: the {ordinal(i + 1)} [[methods]]")
    ]
    _check_unique(dataset_entries, "datasets")
    _check_unique(method_entries, "methods")
    check_memory(dataset_entries, method_entries, settings["memory_limit"])
    if text is None:
        text = json.dumps(data, indent=2, sort_keys=True, default=str)
    return Suite(
        source=source,
        text=text,
        datasets=tuple(dataset_entries),
        methods=tuple(method_entries),
        **settings,
    )


def _tables(data: dict, kind: str, source: str) -> list[dict]:
    tables = data.get(kind)
    if tables is None or tables == []:
        raise InputError(f"{source}: the suite has no [[{kind}]] table; add at least one")
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        raise InputError(
            f"{source}: `{kind}` must be written as [[{kind}]] tables, got {type(tables).__name__}"
        )
    return tables


def _check_settings(table: Any, source: str) -> dict:
    where = f"{source}: [suite]"
    if table is None:
        raise InputError(f"{source}: the [suite] table is missing; add one with at least `name`")
    if not isinstance(table, dict):
        raise InputError(f"{source}: `suite` must be a table [suite]")
    for key in table:
        if key not in SUITE_KEYS:
            raise InputError(
                f"{where}: unknown key `{key}`{suggestion(key, SUITE_KEYS)}; valid keys are "
                + ", ".join(SUITE_KEYS)
            )
    out = dict(DEFAULTS)
    out.update(table)
    name = out.get("name")
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9_.-]*", name):
        raise InputError(
            f"{where}: `name` must be a short name of letters, digits, '_', '.' or '-' (it names "
            f"the results folder), got {name!r}"
        )
    out["n_components"] = _positive_int(out["n_components"], where, "n_components")
    out["threads"] = _positive_int(out["threads"], where, "threads")
    out["seeds"] = _int_list(out["seeds"], where, "seeds", low=0)
    out["neighbors"] = tuple(sorted(set(_int_list(out["neighbors"], where, "neighbors", low=1))))
    out["timeout"] = _timeout(out["timeout"], where)
    out["memory_limit"] = parse_memory(out["memory_limit"], where=f"{where}: `memory_limit`")
    if not isinstance(out["description"], str):
        raise InputError(f"{where}: `description` must be a string")
    known = _metric_names()
    metrics = out["metrics"]
    if metrics is not None:
        if isinstance(metrics, str):
            metrics = [metrics]
        if not isinstance(metrics, list) or not metrics:
            raise InputError(f"{where}: `metrics` must be a non-empty list of criterion names")
        for m in metrics:
            _check_metric(m, known, where, "metrics")
        metrics = tuple(dict.fromkeys(metrics))
    out["metrics"] = metrics
    out["headline"] = tuple(
        _criterion_entry(e, known, metrics, out["neighbors"], where, "headline")
        for e in _entry_list(out["headline"], where, "headline")
    )
    select = out["select"]
    if select != "overall":
        if not isinstance(select, str):
            raise InputError(
                f'{where}: `select` must be "overall" or one criterion, got {select!r}'
            )
        _criterion_entry(select, known, metrics, out["neighbors"], where, "select")
    published = out["published"]
    if published and not isinstance(published, str):
        raise InputError(f"{where}: `published` must be the path of a CSV file, got {published!r}")
    unprinted = out["unprinted"]
    if not isinstance(unprinted, list | tuple) or not all(isinstance(u, str) for u in unprinted):
        raise InputError(
            f"{where}: `unprinted` must be a list of strings (the settings a publication does "
            "not print, with the values chosen here)"
        )
    out["unprinted"] = tuple(unprinted)
    alpha = out["alpha"]
    if isinstance(alpha, bool) or not isinstance(alpha, int | float) or not 0 < alpha < 0.5:
        raise InputError(
            f"{where}: `alpha` must be a number in (0, 0.5), e.g. 0.05, got {alpha!r}"
        )
    out["alpha"] = float(alpha)
    return out


def _entry_list(value: Any, where: str, key: str) -> list:
    if value is None:
        return []
    entries = [value] if isinstance(value, str) else value
    if not isinstance(entries, list | tuple) or not entries:
        raise InputError(
            f"{where}: `{key}` must be a criterion or a list of criteria, e.g. "
            '"trustworthiness" or ["knn_accuracy@1", "trustworthiness@12"]'
        )
    return list(entries)


def _criterion_entry(
    entry: Any,
    known: list[str],
    metrics: tuple[str, ...] | None,
    neighbors: tuple[int, ...],
    where: str,
    key: str,
) -> str:
    name, k = _headline_entry(entry, where)
    _check_metric(name, known, where, key)
    if metrics is not None and name not in metrics and name not in RUNNER_METRICS:
        raise InputError(
            f"{where}: the `{key}` criterion {name!r} is not among `metrics`; add it to "
            "`metrics` or choose one of them"
        )
    if k is not None and k not in neighbors:
        raise InputError(
            f"{where}: the `{key}` criterion {entry!r} asks for K = {k}, which is not "
            f"among `neighbors` {list(neighbors)}; add it there or choose one of them"
        )
    return str(entry)


def _headline_entry(entry: Any, where: str) -> tuple[Any, int | None]:
    """Split a headline entry ``"name"`` or ``"name@K"`` into the name and K (None)."""
    if not isinstance(entry, str) or "@" not in entry:
        return entry, None
    name, _, k = entry.partition("@")
    if not k.isdigit() or int(k) < 1:
        raise InputError(
            f"{where}: the `headline` entry {entry!r} must be a criterion name or 'name@K' "
            "with K a positive integer"
        )
    return name, int(k)


def _metric_names() -> list[str]:
    from lowdim import metrics

    return list(dict.fromkeys([*metrics.metric_names(), *RUNNER_METRICS]))


def _check_metric(name: Any, known: list[str], where: str, key: str) -> None:
    if not isinstance(name, str):
        raise InputError(f"{where}: `{key}` must name criteria as strings, got {name!r}")
    if name not in known:
        raise InputError(
            f"{where}: `{key}` names an unknown criterion {name!r}{suggestion(name, known)}; "
            "`lowdim metrics` lists them"
        )


def _positive_int(value: Any, where: str, key: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(f"{where}: `{key}` must be a positive integer, got {value!r}")
    return value


def _int_list(value: Any, where: str, key: str, *, low: int) -> tuple[int, ...]:
    items = [value] if isinstance(value, int) and not isinstance(value, bool) else value
    if (
        not isinstance(items, list | tuple)
        or not items
        or any(isinstance(v, bool) or not isinstance(v, int) or v < low for v in items)
    ):
        raise InputError(
            f"{where}: `{key}` must be a non-empty list of integers >= {low}, got {value!r}"
        )
    return tuple(dict.fromkeys(items))


def _timeout(value: Any, where: str) -> float | None:
    if value is None or (isinstance(value, str) and value.lower() == "none"):
        return None
    if isinstance(value, bool) or not isinstance(value, int | float) or not value > 0:
        raise InputError(
            f'{where}: `timeout` must be a number of seconds > 0 or "none", got {value!r}'
        )
    if not math.isfinite(value):
        return None
    return float(value)


def parse_memory(value: Any, *, where: str = "memory limit") -> int | None:
    """Bytes from ``"4GB"``, ``"512 MB"``, ``"2GiB"`` or a number of bytes; None for none.

    Units are binary (1 GB = 2**30 bytes), as the kernel counts memory.
    """
    if value is None or (isinstance(value, str) and value.strip().lower() in ("none", "")):
        return None
    if isinstance(value, int | float) and not isinstance(value, bool) and value > 0:
        return int(value)
    if isinstance(value, str):
        match = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*([A-Za-z]*)\s*", value)
        if match and match.group(2).lower() in _UNITS and float(match.group(1)) > 0:
            return int(float(match.group(1)) * _UNITS[match.group(2).lower()])
    raise InputError(f'{where} must be a size such as "4GB" or "512MB" (or "none"), got {value!r}')


def _grid(table: dict, where: str) -> tuple[dict, list[dict]]:
    """Split a table into its fixed part and the list of grid points."""
    fixed = {k: v for k, v in table.items() if k != "grid"}
    grid = table.get("grid", {})
    if not isinstance(grid, dict):
        raise InputError(
            f"{where}: `grid` must be a table of lists, e.g. grid.bandwidth = [0.5, 1.0]"
        )
    for key, values in grid.items():
        if not isinstance(values, list) or not values:
            raise InputError(
                f"{where}: `grid.{key}` must be a non-empty list of values, got {values!r}"
            )
        if key in ("name", "import", "label", "file", "seed"):
            raise InputError(f"{where}: `{key}` cannot be swept; write one table for each value")
        if key in fixed:
            raise InputError(
                f"{where}: `{key}` is set both as a fixed value and in `grid.{key}`; keep one"
            )
    keys = list(grid)
    points = [dict(zip(keys, combo, strict=True)) for combo in itertools.product(*grid.values())]
    return fixed, points


def _format_value(value: Any) -> str:
    if isinstance(value, str):
        return value
    return json.dumps(value, default=str) if isinstance(value, list | dict) else str(value)


def _label(base: str, params: dict) -> str:
    if not params:
        return base
    inner = ", ".join(f"{k}={_format_value(v)}" for k, v in params.items())
    return f"{base}({inner})"


def _check_label(label: Any, where: str) -> str | None:
    if label is None:
        return None
    if not isinstance(label, str) or not label.strip():
        raise InputError(f"{where}: `label` must be a non-empty string, got {label!r}")
    return label.strip()


def _dataset_entries(table: dict, where: str, base: Path) -> list[Entry]:
    from lowdim import datasets

    label = _check_label(table.get("label"), where)
    fixed, points = _grid({k: v for k, v in table.items() if k != "label"}, where)
    if "file" in fixed and isinstance(fixed["file"], str):
        path = Path(fixed["file"]).expanduser()
        fixed["file"] = str(path if path.is_absolute() else base / path)
    defaults = {}
    if isinstance(fixed.get("name"), str):
        try:
            defaults = datasets.validate_spec({"name": fixed["name"]}, where=where)
        except InputError:
            defaults = {}
    content = _file_hash(fixed, where)
    entries = []
    for point in points:
        raw = {**fixed, **point}
        spec = datasets.validate_spec(raw, where=where)
        size = file_size(spec, where) if "file" in spec else None
        if "file" in spec:
            shown = {k: v for k, v in raw.items() if k != "file"}
            name = Path(str(spec["file"])).name
            id_spec = {k: v for k, v in spec.items() if k != "file"}
            id_spec["file_sha256"] = content
            id_spec["file_name"] = name
        else:
            shown = {
                k: v
                for k, v in raw.items()
                if k not in ("name", "seed") and (k in point or defaults.get(k, object()) != v)
            }
            name = str(spec["name"]) if "name" in spec else f"openml:{spec.get('openml')}"
            id_spec = dict(spec)
        if label is None:
            text = _label(name, shown)
        else:
            text = _label(label, point)
        entries.append(Entry(spec=spec, label=text, where=where, id_spec=id_spec, size=size))
    return entries


def _file_hash(fixed: dict, where: str) -> str | None:
    from lowdim.datasets.headers import check_readable

    if "file" not in fixed:
        return None
    path = Path(str(fixed["file"]))
    try:
        check_readable(path, f"{where}: the data file {str(path)!r} (key `file`)")
    except FileNotFoundError:
        raise InputError(
            f"{where}: the data file {str(path)!r} (key `file`) does not exist"
        ) from None
    digest = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _method_entries(table: dict, where: str) -> list[Entry]:
    from lowdim._validation import check_param
    from lowdim.methods import get_method, import_object, method_unavailable

    label = _check_label(table.get("label"), where)
    fixed, points = _grid({k: v for k, v in table.items() if k != "label"}, where)
    has_name, has_import = "name" in fixed, "import" in fixed
    if has_name == has_import:
        raise InputError(
            f"{where}: give either `name` (a registered method) or `import` "
            '("package.module:Class"), not both or neither'
        )
    key = "name" if has_name else "import"
    target = fixed.pop(key)
    if not isinstance(target, str):
        raise InputError(f"{where}: `{key}` must be a string, got {target!r}")
    try:
        cls = get_method(target) if has_name else import_object(target)
    except InputError as exc:
        raise InputError(f"{where}: `{key}`: {exc}") from None
    # a peer whose package is missing: the fix (the extra to install) before anything runs
    missing = method_unavailable(target) if has_name else None
    if missing:
        raise InputError(f"{where}: {missing}")
    given = list(dict.fromkeys([*fixed, *(points[0] if points else {})]))
    defaults = method_defaults(cls, target, key, where, given)
    specs = getattr(cls, "_param_specs", {})
    owner = cls.__name__
    for point in points:
        for param, value in {**fixed, **point}.items():
            if param in specs:
                try:
                    check_param(owner, param, value, specs[param], {})
                except InputError as exc:
                    raise InputError(f"{where}: {exc}") from None
        check_construction(cls, target, where, {**fixed, **point})
    base = target if has_name else _import_label(target)
    entries = []
    for point in points:
        params = {**fixed, **point}
        spec = {key: target, **params}
        if label is None:
            shown = {k: v for k, v in params.items() if k in point or defaults.get(k) != v}
            text = _label(base, shown)
        else:
            text = _label(label, point)
        entries.append(Entry(spec=spec, label=text, where=where, id_spec=spec))
    return entries


def _import_label(target: str) -> str:
    module, _, attr = target.partition(":")
    return f"{module.split('.')[0]}.{attr}"


def _check_unique(entries: list[Entry], kind: str) -> None:
    by_label: dict[str, Entry] = {}
    by_spec: dict[str, Entry] = {}
    for entry in entries:
        key = json.dumps(entry.id_spec, sort_keys=True, default=str)
        if key in by_spec:
            other = by_spec[key]
            raise InputError(
                f"{entry.where}: this table repeats {other.label!r} from {_table_of(other)}; "
                f"remove one of the two"
            )
        if entry.label in by_label:
            other = by_label[entry.label]
            raise InputError(
                f"{entry.where}: the display label {entry.label!r} is already used by "
                f"{_table_of(other)} for different {kind} settings; set a distinct `label`"
            )
        by_label[entry.label] = entry
        by_spec[key] = entry


def _table_of(entry: Entry) -> str:
    return entry.where.rpartition(": ")[2]
