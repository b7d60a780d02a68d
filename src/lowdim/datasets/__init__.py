"""Datasets: generated manifolds with ground truth, bundled real data, the user's own files.

``load(spec) -> Dataset`` takes a suite's ``[[datasets]]`` table as a dict, for example
``{"name": "swiss_roll", "n": 800, "noise": 0.1, "seed": 0}`` or
``{"file": "data/cells.csv", "labels": "cell_type", "drop": ["id"], "scale": "standard"}``;
``validate_spec`` checks one without loading anything; ``dataset_names`` and ``describe``
say what there is.
"""

from lowdim.datasets._base import Dataset, dataset_names
from lowdim.datasets.checks import DataWarning
from lowdim.datasets.specs import describe, load, subsample_rows, validate_spec

__all__ = [
    "Dataset",
    "DataWarning",
    "load",
    "validate_spec",
    "dataset_names",
    "describe",
    "subsample_rows",
]
