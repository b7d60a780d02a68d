"""Real data: the sets that ship with scikit-learn (no network), and OpenML downloads.

OpenML data (``{"openml": 554}`` or ``{"openml": "iris"}``) is fetched once with
``sklearn.datasets.fetch_openml`` and kept as a plain CSV plus a JSON note in a cache folder
(the spec's ``cache``, else ``$LOWDIM_CACHE``, else ``~/.cache/lowdim``, each with an
``openml`` sub-folder); later loads read the cache and need no network. Offline without a
cached copy, the error says so and where the cache is.

References
----------
.. [1] J. Vanschoren, J. N. van Rijn, B. Bischl and L. Torgo, "OpenML: networked science in
   machine learning", SIGKDD Explorations 15(2), 2013.
"""

from __future__ import annotations

import dataclasses
import json
import os
from pathlib import Path

import numpy as np
import pandas as pd

from lowdim._files import atomic_path
from lowdim.datasets._base import Dataset, Family, register
from lowdim.datasets.checks import numeric_matrix
from lowdim.datasets.preprocess import PREPROCESS_PARAMS
from lowdim.datasets.tables import assemble, split_frame
from lowdim.errors import InputError

__all__ = ["BUNDLED", "default_cache", "load_openml"]

# name -> (scikit-learn loader, summary, citation); citations from memory.
BUNDLED: dict[str, tuple[str, str, str]] = {
    "digits": (
        "load_digits",
        "8 x 8 images of handwritten digits, 1,797 x 64, 10 classes",
        "E. Alpaydin and C. Kaynak, Optical Recognition of Handwritten Digits, UCI Machine "
        "Learning Repository, 1998",
    ),
    "iris": (
        "load_iris",
        "iris flower measurements, 150 x 4, 3 species",
        "R. A. Fisher, The use of multiple measurements in taxonomic problems, Annals of "
        "Eugenics 7(2), 179-188, 1936",
    ),
    "wine": (
        "load_wine",
        "chemical analysis of wines from three cultivars, 178 x 13, 3 classes",
        "M. Forina et al., PARVUS, Genoa, 1988; UCI Machine Learning Repository (Wine)",
    ),
    "breast_cancer": (
        "load_breast_cancer",
        "features of breast-mass cell nuclei, 569 x 30, malignant or benign",
        "W. N. Street, W. H. Wolberg and O. L. Mangasarian, Nuclear feature extraction for "
        "breast tumor diagnosis, IS&T/SPIE Electronic Imaging 1905, 861-870, 1993",
    ),
}

_OPENML_CITATION = (
    "J. Vanschoren, J. N. van Rijn, B. Bischl and L. Torgo, OpenML: networked science in "
    "machine learning, SIGKDD Explorations 15(2), 2013"
)


def _bundled_builder(name: str, loader: str, citation: str):
    def build(spec: dict) -> Dataset:
        import sklearn.datasets

        bunch = getattr(sklearn.datasets, loader)()
        columns = [str(c) for c in bunch.feature_names]
        meta = {
            "source": f"scikit-learn (sklearn.datasets.{loader})",
            "citation": citation,
        }
        # Constant columns (blank corner pixels of digits) and duplicate rows (in iris) are part
        # of the sets as shipped: recorded in meta, without a warning on every load.
        dataset = assemble(
            name,
            np.asarray(bunch.data, dtype=np.float64),
            columns,
            spec=spec,
            where=f"the dataset {name!r}",
            meta=meta,
            labels=bunch.target,
            warn=False,
        )
        classes = [str(c) for c in bunch.target_names]
        return dataclasses.replace(dataset, meta={**dataset.meta, "classes": classes})

    return build


for _name, (_loader, _summary, _citation) in BUNDLED.items():
    register(
        Family(
            _name,
            "bundled",
            _summary,
            f"scikit-learn (sklearn.datasets.{_loader})",
            _citation,
            dict(PREPROCESS_PARAMS),
            _bundled_builder(_name, _loader, _citation),
        )
    )


def default_cache() -> Path:
    """The cache folder for downloads: ``$LOWDIM_CACHE`` or ``~/.cache/lowdim``."""
    return Path(os.environ.get("LOWDIM_CACHE") or Path.home() / ".cache" / "lowdim")


def _cache_paths(ident: int | str, cache: Path) -> tuple[Path, Path]:
    stem = f"openml-{ident}" if isinstance(ident, int) else f"openml-name-{ident}"
    return cache / f"{stem}.csv", cache / f"{stem}.json"


def _write_atomically(path: Path, write) -> None:
    with atomic_path(path) as temporary:
        write(temporary)


def _download(ident: int | str, cache: Path, where: str) -> None:
    import sklearn.datasets

    by = {"data_id": ident} if isinstance(ident, int) else {"name": ident}
    try:
        bunch = sklearn.datasets.fetch_openml(
            **by, data_home=str(cache / "sklearn"), as_frame=True, parser="auto", n_retries=2
        )
    except OSError as exc:  # URLError and socket errors are OSErrors
        raise InputError(
            f"{where} is not in the cache folder {str(cache)!r} and could not be downloaded "
            f"({type(exc).__name__}: {' '.join(str(exc).split())}); connect to the network "
            "once, or set `cache` (or $LOWDIM_CACHE) to a folder holding a copy"
        ) from None
    except ValueError as exc:
        raise InputError(f"{where} could not be fetched: {' '.join(str(exc).split())}") from None
    frame = bunch.frame if bunch.frame is not None else pd.DataFrame(bunch.data)
    targets = list(bunch.target_names or [])
    details = dict(getattr(bunch, "details", None) or {})
    info = {
        "target": targets[0] if len(targets) == 1 else None,
        "name": details.get("name"),
        "version": details.get("version"),
        "id": details.get("id", ident),
        "citation": details.get("citation"),
    }
    cache.mkdir(parents=True, exist_ok=True)
    csv_path, json_path = _cache_paths(ident, cache)
    _write_atomically(json_path, lambda p: p.write_text(json.dumps(info, default=str)))
    _write_atomically(csv_path, lambda p: frame.to_csv(p, index=False))


def load_openml(spec: dict) -> Dataset:
    """Load an OpenML dataset by id or name, from the cache or by download."""
    ident = spec["openml"]
    cache = Path(spec.get("cache") or default_cache()).expanduser() / "openml"
    where = f"OpenML dataset {ident!r}"
    csv_path, json_path = _cache_paths(ident, cache)
    cached = csv_path.exists() and json_path.exists()
    if not cached:
        _download(ident, cache, where)
    # A fresh download is read back from the cache too, so both paths give the same types.
    frame = pd.read_csv(csv_path, low_memory=False)
    info = json.loads(json_path.read_text())
    label_column = spec.get("labels") or info.get("target")
    selection = {**spec, "labels": label_column}
    features, labels = split_frame(frame, selection, where)
    notes: list[str] = []
    X = numeric_matrix(features, where, notes)
    citation = _OPENML_CITATION + (f"; {info['citation']}" if info.get("citation") else "")
    meta = {
        "source": f"OpenML (id {info.get('id')}, {info.get('name')!r}, version "
        f"{info.get('version')})",
        "citation": citation,
        "cache_path": str(csv_path),
        "from_cache": cached,
        "warnings": notes,
    }
    return assemble(
        f"openml_{ident}",
        X,
        [str(c) for c in features.columns],
        spec=spec,
        where=where,
        meta=meta,
        labels=labels,
        label_name=label_column,
    )
