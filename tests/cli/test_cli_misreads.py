"""Data a reader could silently misread: each is refused in one line or used with a note saying
what was done, through the real command line (``lowdim.cli.main`` in process).

Duplicated column names, dates and other non-numbers in Parquet, a label column of one class
or of nothing, values whose squares overflow or underflow float64, a file with one feature
column given to ``compare``.
"""

from __future__ import annotations

import sqlite3
import textwrap

import numpy as np
import pandas as pd
import pytest
from cli_helpers import assert_one_line_error, run_cli
from numpy.testing import assert_allclose
from sklearn.decomposition import PCA

RNG = np.random.default_rng(7)
# A made-up orchard survey: 40 trees, three numeric readings.
READINGS = RNG.normal(size=(40, 3)) * [2.0, 1.0, 0.5]


def write_csv(path, header, rows):
    lines = [",".join(header)] + [",".join(str(v) for v in row) for row in rows]
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def out(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    return folder


# --- duplicated column names


def test_duplicated_column_names_are_refused_not_renamed(tmp_path, out, capsys):
    # pandas.read_csv would call the twin 'girth.1', so --drop girth would leave it in.
    rows = [(i, *READINGS[i], READINGS[i, 0] * 3) for i in range(40)]
    path = write_csv(tmp_path / "orchard.csv", ["tree", "girth", "height", "crown", "girth"], rows)
    args = ["embed", path, "--method", "pca", "--drop", "girth", "--out", out / "e.csv"]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "duplicated column names: 'girth' (columns 2 and 5)")
    assert list(out.iterdir()) == []


def test_duplicated_column_names_in_parquet_are_refused(tmp_path, out, capsys):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    columns = [pa.array(READINGS[:, j]) for j in range(3)]
    pq.write_table(pa.table(columns, names=["girth", "height", "girth"]), tmp_path / "o.parquet")
    args = ["compare", tmp_path / "o.parquet", "--quick", "--out", out / "r"]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "duplicated column names: 'girth'")
    assert list(out.iterdir()) == []


# --- Parquet columns that are not numbers


def _parquet(tmp_path, extra: dict):
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame(READINGS, columns=["girth", "height", "crown"])
    for name, values in extra.items():
        frame[name] = values
    path = tmp_path / "orchard.parquet"
    frame.to_parquet(path)
    return path


@pytest.mark.parametrize(
    "values, words",
    [
        (pd.date_range("2024-03-01", periods=40, freq="D"), "holds dates and times"),
        (pd.date_range("2024-03-01", periods=40, freq="h", tz="UTC"), "holds dates and times"),
        (pd.to_timedelta(np.arange(40), unit="min"), "holds time spans"),
        (pd.Categorical(["apple", "pear"] * 20), "holds categories"),
        ([[1.0, 2.0]] * 40, "holds values of type"),
    ],
)
def test_non_numeric_parquet_columns_are_refused(values, words, tmp_path, out, capsys):
    path = _parquet(tmp_path, {"planted": values})
    status, _, err = run_cli(["embed", path, "--method", "pca", "--out", out / "e.csv"], capsys)
    assert_one_line_error(status, err, f"column 'planted' {words}", "`drop`")
    assert list(out.iterdir()) == []


def test_a_date_column_named_in_drop_is_left_out(tmp_path, out, capsys):
    path = _parquet(tmp_path, {"planted": pd.date_range("2024-03-01", periods=40, freq="D")})
    args = ["embed", path, "--method", "pca", "--drop", "planted", "--out", out / "e.npy"]
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    # The same embedding as scikit-learn's PCA of the numeric columns, up to column signs.
    expected = PCA(n_components=2).fit_transform(READINGS)
    got = np.load(out / "e.npy")
    assert_allclose(np.abs(got), np.abs(expected), atol=1e-10)


def test_true_false_columns_are_read_as_one_and_zero_with_a_note(tmp_path, out, capsys):
    flags = np.arange(40) % 3 == 0
    path = _parquet(tmp_path, {"pruned": flags})
    status, _, err = run_cli(["embed", path, "--method", "pca", "--out", out / "e.npy"], capsys)
    assert status == 0, err
    assert "column(s) 'pruned' hold true / false; they are read as 1 / 0" in err
    expected = PCA(n_components=2).fit_transform(np.column_stack([READINGS, flags]))
    assert_allclose(np.abs(np.load(out / "e.npy")), np.abs(expected), atol=1e-10)


# --- label columns that cannot tell methods apart


def _suite(tmp_path, data_file, labels):
    suite = tmp_path / "orchard.toml"
    suite.write_text(
        textwrap.dedent(
            f"""
            [suite]
            name = "orchard"
            neighbors = [5]
            metrics = ["trustworthiness", "knn_accuracy", "silhouette"]
            [[datasets]]
            file = "{data_file.name}"
            labels = "{labels}"
            [[methods]]
            name = "pca"
            """
        )
    )
    return suite


def _store_rows(folder, sql):
    db = sqlite3.connect(f"file:{folder / 'store.sqlite'}?mode=ro", uri=True)
    try:
        return list(db.execute(sql))
    finally:
        db.close()


@pytest.mark.parametrize(
    "label_values, words",
    [
        (["orchard-north"] * 40, "holds a single class ('orchard-north') in all 40 rows"),
        ([""] * 40, "is empty (all 40 values are missing)"),
    ],
)
def test_label_criteria_are_skipped_with_a_note(label_values, words, tmp_path, capsys):
    rows = [(label_values[i], *READINGS[i]) for i in range(40)]
    path = write_csv(tmp_path / "orchard.csv", ["block", "girth", "height", "crown"], rows)
    results = tmp_path / "results"
    args = ["run", _suite(tmp_path, path, "block"), "--out", results, "--quiet", "--no-report"]
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    metrics = {m for (m,) in _store_rows(results, "SELECT DISTINCT metric FROM scores")}
    # A one-class vote is always right: knn_accuracy would be 1.000 for every method.
    assert "knn_accuracy" not in metrics and "silhouette" not in metrics
    assert "trustworthiness" in metrics
    [(job_status, notes)] = _store_rows(results, "SELECT status, notes FROM jobs")
    assert job_status == "ok"
    assert words in notes and "criteria that need labels are skipped" in notes


def test_embed_keeps_a_single_class_column_in_its_output(tmp_path, out, capsys):
    rows = [("orchard-north", *READINGS[i]) for i in range(40)]
    path = write_csv(tmp_path / "orchard.csv", ["block", "girth", "height", "crown"], rows)
    args = ["embed", path, "--method", "pca", "--labels", "block", "--out", out / "e.csv"]
    status, _, err = run_cli(args, capsys)
    assert status == 0 and "holds a single class" in err
    written = pd.read_csv(out / "e.csv")
    assert list(written.columns) == ["dim1", "dim2", "block"]
    assert set(written["block"]) == {"orchard-north"}


def test_a_label_scheme_of_one_cell_is_refused(tmp_path, capsys):
    suite = tmp_path / "one.toml"
    suite.write_text(
        '[suite]\nname = "one"\n[[datasets]]\nname = "swiss_roll"\nlabels = "bands:1"\n'
        '[[methods]]\nname = "pca"\n'
    )
    status, _, err = run_cli(["run", suite, "--out", tmp_path / "r"], capsys)
    assert_one_line_error(status, err, "'bands:1' gives every point the same label")
    assert not (tmp_path / "r").exists()


# --- values whose squares leave float64


@pytest.mark.parametrize(
    "factor, words",
    [(1e300, "their squares overflow double precision"), (1e-300, "smallest normal double")],
)
def test_values_near_the_ends_of_float64_ask_to_scale_first(factor, words, tmp_path, out, capsys):
    rows = [tuple(f"{v:.17g}" for v in READINGS[i] * factor) for i in range(40)]
    path = write_csv(tmp_path / "extreme.csv", ["girth", "height", "crown"], rows)
    for method in ["pca", "kernel_pca", "laplacian_eigenmaps"]:
        args = ["embed", path, "--method", method, "--out", out / "e.csv"]
        status, _, err = run_cli(args, capsys)
        assert_one_line_error(status, err, words, "scale the data first")
    assert list(out.iterdir()) == []


def test_scaling_in_the_suite_makes_extreme_values_usable(tmp_path, capsys):
    rows = [tuple(f"{v:.17g}" for v in READINGS[i] * 1e300) for i in range(40)]
    path = write_csv(tmp_path / "extreme.csv", ["girth", "height", "crown"], rows)
    suite = tmp_path / "scaled.toml"
    suite.write_text(
        f'[suite]\nname = "scaled"\nneighbors = [5]\nmetrics = ["trustworthiness"]\n'
        f'[[datasets]]\nfile = "{path.name}"\nscale = "standard"\n[[methods]]\nname = "pca"\n'
    )
    results = tmp_path / "results"
    status, _, err = run_cli(["run", suite, "--out", results, "-q", "--no-report"], capsys)
    assert status == 0, err
    [(job_id, job_status)] = _store_rows(results, "SELECT job_id, status FROM jobs")
    assert job_status == "ok"
    # Standardising is blind to a positive factor per column (exact fact), so the embedding is
    # scikit-learn's PCA of the standardised readings, up to column signs.
    z = (READINGS - READINGS.mean(axis=0)) / READINGS.std(axis=0)
    got = np.load(results / "embeddings" / f"{job_id}.npy")
    assert_allclose(np.abs(got), np.abs(PCA(n_components=2).fit_transform(z)), atol=1e-9)


# --- compare needs two feature columns


@pytest.mark.parametrize(
    "header, rows, extra",
    [
        (["girth"], [(v,) for v in READINGS[:, 0]], []),
        (["tree", "girth"], [(i, v) for i, v in enumerate(READINGS[:, 0])], ["--drop", "tree"]),
        (["girth", "site"], [(v, 4.0) for v in READINGS[:, 0]], []),  # 'site' is constant
    ],
)
def test_compare_refuses_a_single_feature_column(header, rows, extra, tmp_path, out, capsys):
    path = write_csv(tmp_path / "girths.csv", header, rows)
    args = ["compare", path, "--quick", "--out", out / "r", *extra]
    status, stdout, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "has one feature column ('girth')", "at least two")
    assert "Recommendation" not in stdout
    assert list(out.iterdir()) == []


def test_an_archive_of_python_objects_is_refused_in_one_line(tmp_path, out, capsys):
    # numpy.load refuses object arrays unless pickles are allowed; lowdim never allows them.
    path = tmp_path / "orchard.npz"
    np.savez(path, X=READINGS, labels=np.array(["north", "south"] * 20, dtype=object))
    args = ["embed", path, "--method", "pca", "--out", out / "e.csv"]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "'labels' holds Python objects", "astype(str)")


def test_compare_and_embed_scale_extreme_values_when_asked(tmp_path, out, capsys):
    rows = [tuple(f"{v:.17g}" for v in READINGS[i] * 1e300) for i in range(40)]
    path = write_csv(tmp_path / "extreme.csv", ["girth", "height", "crown"], rows)
    args = ["embed", path, "--method", "pca", "--scale", "standard", "--out", out / "e.npy"]
    status, _, err = run_cli(args, capsys)
    assert status == 0, err
    z = (READINGS - READINGS.mean(axis=0)) / READINGS.std(axis=0)
    expected = PCA(n_components=2).fit_transform(z)  # scikit-learn, up to column signs
    assert_allclose(np.abs(np.load(out / "e.npy")), np.abs(expected), atol=1e-9)
    # compare looks at the raw columns too, but the methods only see the scaled values
    args = ["compare", path, "--scale", "standard", "--quick", "--methods", "pca"]
    status, stdout, err = run_cli([*args, "--out", out / "r", "--quiet"], capsys)
    assert status == 0, err
    assert "Use pca." in stdout and "--scale standard" in stdout
