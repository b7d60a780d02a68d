"""validate_spec and load: checking a spec without loading, defaults, normalisation, errors."""

import numpy as np
import pytest

from lowdim.datasets import describe, load, validate_spec
from lowdim.errors import InputError

WHERE = "suites/quick.toml, the 2nd [[datasets]]"


def test_defaults_are_filled_in_and_values_normalised():
    spec = validate_spec({"name": "Swiss_Roll", "n": 800, "noise": 0, "labels": "Checker:5x3"})
    assert spec == {
        "name": "swiss_roll",
        "n": 800,
        "noise": 0.0,
        "ambient_dim": None,
        "density": 0.0,
        "labels": "checker:5x3",
        "height": 21.0,
        "scale": "none",
        "log1p": False,
        "pca_first": None,
    }
    assert isinstance(spec["noise"], float)
    # Equal specs written differently normalise alike, so their job ids agree.
    assert validate_spec({"name": "swiss_roll", "n": 800, "noise": 0.0}) == validate_spec(
        {"name": "swiss_roll", "noise": 0, "n": 800}
    )


def test_seed_is_kept_when_given_and_never_filled_in():
    assert "seed" not in validate_spec({"name": "torus"})
    assert validate_spec({"name": "torus", "seed": 4})["seed"] == 4
    assert "seed" not in validate_spec({"file": "x.csv"})


def test_label_is_accepted_and_passed_through():
    spec = validate_spec({"name": "iris", "label": "flowers"})
    assert spec["label"] == "flowers"
    assert load({"name": "iris", "label": "flowers"}).name == "iris"


def test_file_specs_are_checked_without_reading_the_file():
    spec = validate_spec({"file": "no/such/dir/cells.CSV", "labels": "kind", "scale": "MinMax"})
    assert spec == {
        "file": "no/such/dir/cells.CSV",
        "labels": "kind",
        "features": None,
        "drop": [],
        "delimiter": None,
        "scale": "minmax",
        "log1p": False,
        "pca_first": None,
    }


@pytest.mark.parametrize(
    ("spec", "words"),
    [
        ({"name": "swiss_rol"}, r"unknown dataset 'swiss_rol' \(did you mean 'swiss_roll'\?\)"),
        (
            {"name": "swiss_roll", "nosie": 0.1},
            r"unknown key `nosie` .* \(did you mean 'noise'\?\)",
        ),
        (
            {"name": "swiss_roll", "n": 1},
            r"`n` of `swiss_roll` must be an int in \[2, inf\), got 1",
        ),
        ({"name": "swiss_roll", "n": 2.5}, "must be an int"),
        ({"name": "swiss_roll", "n": True}, "must be an int"),
        ({"name": "swiss_roll", "noise": -0.1}, r"`noise` .* must be a number in \[0, inf\)"),
        ({"name": "swiss_roll", "noise": "low"}, "`noise`"),
        ({"name": "swiss_roll", "labels": "stripes:3"}, "'checker:AxB' or 'bands:N'"),
        ({"name": "iris", "scale": "zscore"}, "one of 'none', 'standard', 'robust', 'minmax'"),
        ({"name": "iris", "pca_first": 0}, "`pca_first`"),
        ({"name": "iris", "n": 50}, "unknown key `n` for dataset 'iris'"),
        ({"n": 50}, "needs exactly one of `name`, `file` or `openml`, got none"),
        ({"name": "iris", "file": "a.csv"}, "got `name`, `file`"),
        ({"file": "cells.xlsx"}, r"extension '.xlsx'; use one of .csv"),
        ({"file": "cells.npy", "labels": "kind"}, "a .npy file holds one array"),
        ({"file": "cells.npz", "drop": ["id"]}, "0-based column indexes"),
        ({"file": "cells.csv", "drop": "id"}, "a list of distinct column names"),
        ({"file": "cells.csv", "drop": ["id", "id"]}, "distinct"),
        ({"file": "cells.csv", "delimiter": ";;"}, "a single character"),
        ({"openml": 0}, "`openml`"),
        ({"name": 3}, "`name` must be a string"),
        ({"name": "iris", "label": 3}, "`label` must be a string"),
    ],
)
def test_bad_specs_name_where_and_key(spec, words):
    with pytest.raises(InputError, match=words) as info:
        validate_spec(spec, where=WHERE)
    assert str(info.value).startswith(WHERE + ": ")


def test_not_a_table():
    with pytest.raises(InputError, match="must be a table"):
        validate_spec(["swiss_roll"])


def test_load_rejects_what_validate_rejects():
    with pytest.raises(InputError, match="unknown key `nosie`"):
        load({"name": "swiss_roll", "nosie": 0.1})


def test_meta_holds_the_normalised_parameters():
    data = load({"name": "two_moons", "n": 100, "seed": 2})
    assert data.meta["parameters"]["seed"] == 2
    assert data.meta["parameters"]["n"] == 100
    assert data.meta["source"] == "generated" and data.meta["citation"]


def test_describe():
    info = describe("swiss_gap")
    assert info["parameters"]["gap"] == 0.4 and info["parameters"]["labels"] == "classes"
    assert set(info) >= {"parameters", "source", "citation", "summary", "help"}
    assert "ambient_dim" in describe("swiss_roll")["parameters"]
    assert "density" not in describe("blobs")["parameters"]
    assert describe("file")["parameters"]["drop"] == []
    assert "cache" in describe("openml")["parameters"]
    with pytest.raises(InputError, match="did you mean 'torus'"):
        describe("tours")


def test_file_subsample_keeps_rows_in_file_order(tmp_path):
    # The additive contract in DEVELOPERS.md: subsample = N keeps N random rows in file order,
    # drawn with subsample_seed; absent keys stay out of the normalised spec.
    path = tmp_path / "rows.npy"
    np.save(path, np.column_stack([np.arange(100.0), np.arange(100.0) ** 0.5]))
    assert "subsample" not in validate_spec({"file": str(path)})
    spec = {"file": str(path), "subsample": 30, "subsample_seed": 1}
    data = load(spec)
    assert data.X.shape == (30, 2) and np.all(np.diff(data.X[:, 0]) > 0)
    assert data.meta["rows_in_file"] == 100
    assert np.array_equal(load(spec).X, data.X)
    assert not np.array_equal(load({**spec, "subsample_seed": 2}).X, data.X)
    assert load({**spec, "subsample": 500}).X.shape == (100, 2)
