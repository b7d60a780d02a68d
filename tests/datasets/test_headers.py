"""A data file's outline from its header alone, against what loading the whole file finds."""

import os

import numpy as np
import pandas as pd
import pytest

from lowdim.datasets import load
from lowdim.datasets.files import check_file_columns
from lowdim.datasets.headers import check_readable, outline
from lowdim.errors import InputError

# A made-up weather log: 57 hours, four readings and a sky label.
FRAME = pd.DataFrame(
    np.random.default_rng(3).normal(size=(57, 4)), columns=["temp", "wind", "gust", "rain"]
)
FRAME["sky"] = np.where(np.arange(57) % 2, "clear", "overcast")


@pytest.fixture(params=["csv", "tsv", "parquet", "headerless", "npy", "npz"])
def written(request, tmp_path):
    kind = request.param
    if kind == "csv":
        path = tmp_path / "log.csv"
        FRAME.to_csv(path, index=False)
    elif kind == "tsv":
        path = tmp_path / "log.tsv"
        FRAME.to_csv(path, index=False, sep="\t")
    elif kind == "parquet":
        pytest.importorskip("pyarrow")
        path = tmp_path / "log.parquet"
        FRAME.to_parquet(path)
    elif kind == "headerless":
        path = tmp_path / "log.csv"
        FRAME.drop(columns="sky").to_csv(path, index=False, header=False)
    elif kind == "npy":
        path = tmp_path / "log.npy"
        np.save(path, FRAME.drop(columns="sky").to_numpy())
    else:
        path = tmp_path / "log.npz"
        labels = FRAME["sky"].to_numpy(dtype=str)
        np.savez(path, X=FRAME.drop(columns="sky").to_numpy(), labels=labels)
    return kind, path


def test_outline_agrees_with_loading_the_file(written):
    kind, path = written
    fmt = {"headerless": "csv"}.get(kind, kind)
    shape = outline(path, fmt, "here")
    table = kind in ("csv", "tsv", "parquet")
    data = load({"file": str(path), **({"labels": "sky"} if table else {})})
    assert shape.n_rows == data.n_samples == 57
    # A table's header also names its label column 'sky'; an array's labels live apart.
    assert shape.n_columns == data.n_features + table
    if kind in ("csv", "tsv", "parquet"):
        assert shape.columns == list(FRAME.columns)
    elif kind == "headerless":
        assert shape.columns == data.meta["columns"]
    else:
        assert shape.columns is None
    if kind == "npz":
        assert set(shape.keys) == {"X", "labels"}


def test_column_check_uses_the_loader_rules_without_reading_values(tmp_path):
    path = tmp_path / "log.csv"
    FRAME.to_csv(path, index=False)
    # A broken value far down the file does not matter: only the header is read.
    with open(path, "a") as fh:
        fh.write("1,2,3,4,5,6,7\n")
    assert check_file_columns({"file": str(path), "labels": "sky"}, "t").n_columns == 5
    for spec, words in [
        ({"labels": "skies"}, r"no column 'skies' \(named in `labels`\) \(did you mean 'sky'"),
        ({"drop": ["hail"]}, r"no column 'hail' \(named in `drop`\)"),
        ({"features": ["temp", "sky"], "labels": "sky"}, "both in `labels` and in `features`"),
    ]:
        with pytest.raises(InputError, match=words):
            check_file_columns({"file": str(path), **spec}, "the 1st [[datasets]]")


def test_array_columns_are_checked_by_index(tmp_path):
    path = tmp_path / "log.npz"
    np.savez(path, X=np.zeros((5, 3)))
    with pytest.raises(InputError, match="here 0 to 2"):
        check_file_columns({"file": str(path), "drop": [3]}, "t")
    with pytest.raises(InputError, match="no array 'labels'"):
        check_file_columns({"file": str(path), "labels": "labels"}, "t")


def test_readable_checks_name_the_problem(tmp_path):
    loop = tmp_path / "loop.csv"
    os.symlink(loop.name, loop)
    with pytest.raises(InputError, match="leads back to itself"):
        check_readable(loop, "the file")
    dangling = tmp_path / "gone.csv"
    os.symlink("nowhere.csv", dangling)
    with pytest.raises(InputError, match="'nowhere.csv', which does not exist"):
        check_readable(dangling, "the file")
    with pytest.raises(InputError, match="is a folder"):
        check_readable(tmp_path, "the file")
    with pytest.raises(FileNotFoundError):
        check_readable(tmp_path / "absent.csv", "the file")
