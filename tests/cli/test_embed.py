"""``lowdim embed``: one embedding, written as CSV or NPY, parameters checked like a suite's."""

import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from lowdim.cli import main
from lowdim.cli.embed import parse_settings, parse_value
from lowdim.errors import InputError


def up_to_sign(actual, desired):
    # An eigenvector is defined only up to sign: align each column before comparing.
    signs = np.sign(np.einsum("ij,ij->j", actual, desired))
    return actual * signs


@pytest.fixture
def orchard(tmp_path):
    """A made-up orchard survey: per tree, five measurements and the tree's variety."""
    rng = np.random.default_rng(7)
    n = 80
    girth = rng.uniform(20, 60, n)
    frame = pd.DataFrame(
        {
            "tree": np.arange(n),
            "girth_cm": girth,
            "height_m": 0.1 * girth + rng.normal(0, 0.3, n),
            "fruit_kg": 0.8 * girth + rng.normal(0, 4, n),
            "leaf_n": rng.normal(2.5, 0.2, n),
            "bark_ph": rng.normal(5.5, 0.3, n),
            "variety": rng.choice(["bramley", "cox", "gala"], n),
        }
    )
    path = tmp_path / "orchard.csv"
    frame.to_csv(path, index=False)
    return path, frame


def test_csv_output_matches_scikit_learn_pca_with_labels(orchard, tmp_path):
    path, frame = orchard
    out = tmp_path / "trees_2d.csv"
    proc = subprocess.run(
        [sys.executable, "-m", "lowdim", "embed", str(path), "--method", "pca"]
        + ["--labels", "variety", "--drop", "tree", "--out", str(out)],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 0, proc.stderr
    assert "80 x 2 embedding" in proc.stdout
    written = pd.read_csv(out)
    assert list(written.columns) == ["dim1", "dim2", "variety"]
    assert written["variety"].tolist() == frame["variety"].tolist()
    # Reference: sklearn.decomposition.PCA on the same columns, equal up to column signs.
    from sklearn.decomposition import PCA

    X = frame.drop(columns=["tree", "variety"]).to_numpy(float)
    expected = PCA(n_components=2).fit_transform(X)
    Y = written[["dim1", "dim2"]].to_numpy()
    assert_allclose(up_to_sign(Y, expected), expected, rtol=1e-9, atol=1e-9)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["orchard.csv", "trees_2d.csv"]


def test_npy_output_with_n_components_and_set(orchard, tmp_path, capsys):
    path, _ = orchard
    out = tmp_path / "trees.npy"
    args = ["embed", str(path), "--method", "classical_mds", "--n-components", "3"]
    status = main(args + ["--drop", "tree", "--drop", "variety", "--out", str(out)])
    assert status == 0, capsys.readouterr().err
    assert np.load(out).shape == (80, 3)


def test_plugin_method_runs(orchard, tmp_path, capsys):
    plugin = tmp_path / "column_pick.py"
    plugin.write_text(
        textwrap.dedent(
            """
            import numpy as np
            from sklearn.base import BaseEstimator, TransformerMixin
            from lowdim.methods import register_method

            @register_method("first_columns_for_embed_test")
            class FirstColumns(TransformerMixin, BaseEstimator):
                def __init__(self, n_components=2, offset=0.0):
                    self.n_components = n_components
                    self.offset = offset

                def fit(self, X, y=None):
                    return self

                def transform(self, X):
                    return np.asarray(X)[:, : self.n_components] + self.offset
            """
        )
    )
    path, frame = orchard
    out = tmp_path / "picked.csv"
    status = main(
        ["embed", str(path), "--method", "first_columns_for_embed_test", "--set", "offset=1.5"]
        + ["--plugin", str(plugin), "--drop", "tree", "--drop", "variety", "--out", str(out)]
    )
    assert status == 0, capsys.readouterr().err
    written = pd.read_csv(out)
    assert_allclose(written["dim1"], frame["girth_cm"] + 1.5)


def test_values_are_parsed_as_numbers_booleans_none_or_text():
    assert parse_value("15") == 15 and isinstance(parse_value("15"), int)
    assert parse_value("0.5") == 0.5
    assert parse_value("1e-3") == 0.001
    assert parse_value("True") is True and parse_value("false") is False
    assert parse_value("none") is None
    assert parse_value("local:7") == "local:7"
    assert parse_settings(["n_neighbors=15", "weights = heat"]) == {
        "n_neighbors": 15,
        "weights": "heat",
    }
    with pytest.raises(InputError, match="must look like key=value"):
        parse_settings(["n_neighbors"])
    with pytest.raises(InputError, match="gives `alpha` twice"):
        parse_settings(["alpha=0", "alpha=1"])


def test_fit_time_error_leaves_nothing(orchard, tmp_path, capsys):
    path, _ = orchard
    out = tmp_path / "too_many.csv"
    # n_components = n is only known to be wrong once the data is read (at fit time).
    status = main(
        ["embed", str(path), "--method", "pca", "--set", "n_components=80"]
        + ["--drop", "tree", "--drop", "variety", "--out", str(out)]
    )
    err = capsys.readouterr().err
    assert status == 2
    assert "n_components" in err and err.count("\n") == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["orchard.csv"]


def test_quality_adds_per_point_columns_whose_means_are_the_criteria(orchard, tmp_path, capsys):
    path, frame = orchard
    out = tmp_path / "trees_quality.csv"
    status = main(
        ["embed", str(path), "--method", "pca", "--labels", "variety", "--drop", "tree"]
        + ["--quality", "7", "--out", str(out)]
    )
    assert status == 0, capsys.readouterr().err
    written = pd.read_csv(out)
    assert list(written.columns) == [
        "dim1",
        "dim2",
        "variety",
        "qnx@7",
        "trustworthiness@7",
        "continuity@7",
    ]
    # Outside reference: sklearn.manifold.trustworthiness on the same columns; continuity is
    # trustworthiness with the spaces swapped (REFERENCES.md).
    from sklearn.manifold import trustworthiness

    X = frame.drop(columns=["tree", "variety"]).to_numpy(float)
    Y = written[["dim1", "dim2"]].to_numpy()
    assert written["trustworthiness@7"].mean() == pytest.approx(
        trustworthiness(X, Y, n_neighbors=7), abs=1e-9
    )
    assert written["continuity@7"].mean() == pytest.approx(
        trustworthiness(Y, X, n_neighbors=7), abs=1e-9
    )
    assert written["qnx@7"].between(0, 1).all()


def test_quality_without_k_uses_ten_and_refuses_npy(orchard, tmp_path, capsys):
    path, _ = orchard
    base = ["embed", str(path), "--method", "pca", "--drop", "tree", "--drop", "variety"]
    out = tmp_path / "q.csv"
    assert main(base + ["--quality", "--out", str(out)]) == 0
    assert "trustworthiness@10" in pd.read_csv(out).columns
    status = main(base + ["--quality", "--out", str(tmp_path / "q.npy")])
    err = capsys.readouterr().err
    assert status == 2 and "only a .csv output holds" in err
    status = main(base + ["--quality", "40", "--out", str(tmp_path / "big.csv")])
    err = capsys.readouterr().err
    assert status == 2 and "K < n/2" in err and err.count("\n") == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["orchard.csv", "q.csv"]
