"""Real data shipped with scikit-learn, and the cached OpenML download path (no network)."""

import urllib.error

import numpy as np
import pandas as pd
import pytest
import sklearn.datasets
from numpy.testing import assert_allclose, assert_array_equal
from sklearn.utils import Bunch

from lowdim.datasets import describe, load
from lowdim.errors import InputError


@pytest.mark.parametrize(
    ("name", "shape", "n_classes"),
    # Sizes as documented for sklearn.datasets.load_iris / load_wine / load_breast_cancer.
    [("iris", (150, 4), 3), ("wine", (178, 13), 3), ("breast_cancer", (569, 30), 2)],
)
def test_bundled_sets_match_scikit_learn(name, shape, n_classes):
    bunch = getattr(sklearn.datasets, f"load_{name}")()
    data = load({"name": name})
    assert data.X.shape == shape
    assert_allclose(data.X, bunch.data)
    assert_array_equal(data.labels, bunch.target)
    assert len(data.meta["classes"]) == n_classes
    assert data.meta["citation"] and "sklearn.datasets" in data.meta["source"]
    assert describe(name)["citation"] == data.meta["citation"]


def test_iris_has_fifty_of_each_species():
    # Fisher (1936): 50 flowers of each of three species.
    data = load({"name": "iris"})
    assert_array_equal(np.bincount(data.labels), [50, 50, 50])
    assert data.meta["classes"] == ["setosa", "versicolor", "virginica"]
    assert data.meta["n_duplicates"] == 1  # the set as shipped repeats one flower


def test_digits_drops_its_blank_pixels_quietly(recwarn):
    bunch = sklearn.datasets.load_digits()
    data = load({"name": "digits"})
    constant = np.ptp(bunch.data, axis=0) == 0
    assert data.X.shape == (1797, 64 - int(constant.sum()))
    assert_allclose(data.X, bunch.data[:, ~constant])
    assert data.meta["dropped_columns"] == [
        n for n, c in zip(bunch.feature_names, constant, strict=True) if c
    ]
    assert not recwarn.list


def test_bundled_preprocessing():
    data = load({"name": "wine", "scale": "standard", "pca_first": 5})
    assert data.X.shape == (178, 5)
    assert_allclose(data.X.mean(axis=0), 0, atol=1e-10)


# --- OpenML, through a stand-in for sklearn.datasets.fetch_openml


def _fake_fetch(calls):
    # A made-up table of kite flights: wind, line length, string tension, kite type.
    def fetch(name=None, *, data_id=None, data_home=None, **kwargs):
        calls.append({"name": name, "data_id": data_id, "data_home": data_home, **kwargs})
        rng = np.random.default_rng(0)
        frame = pd.DataFrame(
            {
                "wind": rng.normal(6, 2, 30),
                "line": rng.normal(40, 5, 30),
                "tension": rng.normal(3, 1, 30),
                "kite": rng.choice(["delta", "box", "sled"], 30),
            }
        )
        frame["kite"] = frame["kite"].astype("category")
        details = {"id": data_id or 4242, "name": "kite_flights", "version": 1}
        return Bunch(frame=frame, data=frame.iloc[:, :3], target_names=["kite"], details=details)

    return fetch


def test_openml_downloads_once_then_reads_the_cache(tmp_path, monkeypatch):
    calls = []
    monkeypatch.setattr(sklearn.datasets, "fetch_openml", _fake_fetch(calls))
    spec = {"openml": 4242, "cache": str(tmp_path)}
    first = load(spec)
    assert len(calls) == 1 and calls[0]["data_id"] == 4242
    assert calls[0]["data_home"].startswith(str(tmp_path))
    assert first.X.shape == (30, 3) and first.meta["classes"] == ["box", "delta", "sled"]
    assert "OpenML" in first.meta["source"] and "Vanschoren" in first.meta["citation"]
    assert first.meta["from_cache"] is False

    def offline(*args, **kwargs):
        raise AssertionError("the cache should have been used")

    monkeypatch.setattr(sklearn.datasets, "fetch_openml", offline)
    again = load(spec)
    assert again.meta["from_cache"] is True
    assert_allclose(again.X, first.X)
    assert_array_equal(again.labels, first.labels)
    assert load({**spec, "features": ["wind"]}).X.shape == (30, 1)


def test_openml_by_name_and_another_label_column(tmp_path, monkeypatch):
    calls = []
    monkeypatch.setattr(sklearn.datasets, "fetch_openml", _fake_fetch(calls))
    spec = {"openml": "kite_flights", "cache": str(tmp_path), "labels": "wind", "drop": ["kite"]}
    data = load(spec)
    assert calls[0]["name"] == "kite_flights"
    assert data.X.shape == (30, 2) and data.meta["columns"] == ["line", "tension"]
    assert len(data.meta["classes"]) == 30
    with pytest.raises(InputError, match="column 'kite' holds text"):
        load({**spec, "drop": []})


def test_openml_offline_without_a_cache_is_a_clear_error(tmp_path, monkeypatch):
    def unreachable(*args, **kwargs):
        raise urllib.error.URLError("[Errno -3] Temporary failure in name resolution")

    monkeypatch.setattr(sklearn.datasets, "fetch_openml", unreachable)
    with pytest.raises(InputError) as info:
        load({"openml": 554, "cache": str(tmp_path)})
    message = str(info.value)
    assert "OpenML dataset 554 is not in the cache folder" in message
    assert str(tmp_path) in message and "connect to the network once" in message
    assert not list(tmp_path.rglob("*.csv"))  # nothing half-written
