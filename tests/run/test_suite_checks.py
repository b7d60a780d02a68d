"""The suite check before any job runs: file columns, imported classes, memory.

Each mistake goes through the real command line (``lowdim run``, in process): one line naming
the file, the table and the key, exit status 2, and no results folder made.
"""

from __future__ import annotations

import sys
import textwrap
import tracemalloc

import numpy as np
import pandas as pd
import pytest

from lowdim.cli import main
from lowdim.methods import DiffusionMaps, KernelPCA
from lowdim.run.memory_needs import format_bytes, memory_need
from lowdim.run.suites import load_suite


def write_suite(folder, datasets: str, methods: str, settings: str = "") -> str:
    path = folder / "greenhouse.toml"
    path.write_text(
        f'[suite]\nname = "greenhouse"\nneighbors = [5]\n{settings}\n'
        + textwrap.dedent(datasets)
        + textwrap.dedent(methods)
    )
    return str(path)


def refused(capsys, suite, out, *fragments):
    status = main(["run", suite, "--out", str(out), "--quiet", "--no-report"])
    err = capsys.readouterr().err
    assert status == 2, err
    assert err.startswith("lowdim: error: ") and err.count("\n") == 1, err
    for fragment in fragments:
        assert fragment in err, err
    assert not out.exists()  # nothing ran
    return err


PCA_TABLE = '[[methods]]\nname = "pca"\n'
ROLL = '[[datasets]]\nname = "swiss_roll"\nn = 120\n'


@pytest.fixture
def sensors(tmp_path):
    """A made-up greenhouse log: 30 readings of humidity, light and soil moisture per bed."""
    frame = pd.DataFrame(
        np.random.default_rng(2).normal(size=(30, 3)), columns=["humidity", "light", "soil"]
    )
    frame["bed"] = ["east", "west", "south"] * 10
    frame.to_csv(tmp_path / "beds.csv", index=False)
    return tmp_path / "beds.csv"


# --- columns of data files, from the header


@pytest.mark.parametrize(
    "keys, fragment",
    [
        ('labels = "bedd"', "no column 'bedd' (named in `labels`) (did you mean 'bed'?)"),
        ('labels = "bed"\ndrop = ["lite"]', "no column 'lite' (named in `drop`)"),
        ('labels = "bed"\nfeatures = ["soil", "ph"]', "no column 'ph' (named in `features`)"),
        ('features = ["soil", "bed"]\nlabels = "bed"', "both in `labels` and in `features`"),
    ],
)
def test_columns_named_in_a_table_must_be_in_the_file(keys, fragment, sensors, tmp_path, capsys):
    suite = write_suite(tmp_path, f'[[datasets]]\nfile = "beds.csv"\n{keys}\n', PCA_TABLE)
    refused(
        capsys, suite, tmp_path / "r", "the 1st [[datasets]]", "the file", "beds.csv", fragment
    )


def test_parquet_and_npz_columns_are_checked_too(tmp_path, capsys):
    pytest.importorskip("pyarrow")
    frame = pd.DataFrame({"humidity": np.arange(30.0), "light": np.arange(30.0) ** 0.5})
    frame.to_parquet(tmp_path / "beds.parquet")
    np.savez(tmp_path / "beds.npz", X=frame.to_numpy())
    suite = write_suite(
        tmp_path,
        '[[datasets]]\nfile = "beds.npz"\n\n[[datasets]]\nfile = "beds.parquet"\nlabels = "bed"\n',
        PCA_TABLE,
    )
    refused(capsys, suite, tmp_path / "r", "the 2nd [[datasets]]", "no column 'bed'")
    suite = write_suite(tmp_path, '[[datasets]]\nfile = "beds.npz"\ndrop = [2]\n', PCA_TABLE)
    refused(capsys, suite, tmp_path / "r", "`drop` names column 2", "here 0 to 1")


def test_good_columns_pass_and_the_jobs_run(sensors, tmp_path, capsys):
    suite = write_suite(
        tmp_path, '[[datasets]]\nfile = "beds.csv"\nlabels = "bed"\ndrop = ["light"]\n', PCA_TABLE
    )
    assert main(["run", suite, "--out", str(tmp_path / "r"), "-q", "--no-report"]) == 0
    capsys.readouterr()


# --- imported classes


@pytest.mark.parametrize(
    "target, fragment",
    [
        # scikit-learn's regressor and clusterer: fit, then predict / fit_predict, no transform
        ("sklearn.linear_model:LinearRegression", "is not a transformer"),
        ("sklearn.cluster:DBSCAN", "is not a transformer"),
        ("sklearn.preprocessing:normalize", "is not a class but a function"),
    ],
)
def test_an_import_must_name_a_transformer(target, fragment, tmp_path, capsys):
    suite = write_suite(tmp_path, ROLL, f'[[methods]]\nimport = "{target}"\n')
    refused(
        capsys, suite, tmp_path / "r", "the 1st [[methods]]", f"`import = '{target}'`", fragment
    )


@pytest.fixture
def module_dir(tmp_path, monkeypatch):
    """A module of made-up estimators, importable as `greenhouse_methods`."""
    (tmp_path / "greenhouse_methods.py").write_text(
        textwrap.dedent(
            """
            import numpy as np
            from sklearn.base import BaseEstimator, TransformerMixin

            class Shrink(TransformerMixin, BaseEstimator):
                # `factor` has no default: it must be set in the suite
                def __init__(self, factor, n_components=2):
                    self.factor = factor
                    self.n_components = n_components

                def fit(self, X, y=None):
                    return self

                def transform(self, X):
                    return np.asarray(X)[:, : self.n_components] * self.factor

            class FitAndTransformOnly(BaseEstimator):
                def fit(self, X, y=None):
                    return self

                def transform(self, X):
                    return X
            """
        )
    )
    monkeypatch.syspath_prepend(str(tmp_path))
    yield tmp_path
    sys.modules.pop("greenhouse_methods", None)


def test_parameters_come_from_the_signature_of_an_imported_class(module_dir, capsys):
    good = write_suite(
        module_dir, ROLL, '[[methods]]\nimport = "greenhouse_methods:Shrink"\nfactor = 0.5\n'
    )
    assert load_suite(good).methods[0].spec["factor"] == 0.5
    missing = write_suite(module_dir, ROLL, '[[methods]]\nimport = "greenhouse_methods:Shrink"\n')
    refused(capsys, missing, module_dir / "r", "the 1st [[methods]]", "needs `factor`")
    typo = write_suite(
        module_dir, ROLL, '[[methods]]\nimport = "greenhouse_methods:Shrink"\nfactr = 0.5\n'
    )
    refused(capsys, typo, module_dir / "r", "unknown parameter `factr`", "did you mean 'factor'")


def test_fit_and_transform_without_fit_transform_is_refused(module_dir, capsys):
    suite = write_suite(
        module_dir, ROLL, '[[methods]]\nimport = "greenhouse_methods:FitAndTransformOnly"\n'
    )
    refused(capsys, suite, module_dir / "r", "no fit_transform", "TransformerMixin")


# --- memory against the suite's memory_limit


def test_a_dense_kernel_that_cannot_fit_is_refused_with_the_estimate(tmp_path, capsys):
    suite = write_suite(
        tmp_path,
        '[[datasets]]\nname = "swiss_roll"\nn = 60000\n',
        '[[methods]]\nname = "pca"\n[[methods]]\nname = "kernel_pca"\n',
        'memory_limit = "4GB"',
    )
    # 8 bytes per float64 x n^2 for the kernel matrix: 60000^2 x 8 B = 26.8 GiB (arithmetic).
    expected = format_bytes(8 * 60000**2 + 3 * 8 * 60000 * 3)
    assert expected == "26.8 GB"
    refused(
        capsys,
        suite,
        tmp_path / "r",
        "the 2nd [[methods]] (kernel_pca) on the 1st [[datasets]]",
        "n = 60000",
        f"needs about {expected}",
        "`memory_limit` = 4.0 GB",
        "`n_landmarks`",
    )


def test_memory_fixes_named_in_the_message_make_the_suite_pass(tmp_path):
    fixed = write_suite(
        tmp_path,
        '[[datasets]]\nname = "swiss_roll"\nn = 60000\n',
        '[[methods]]\nname = "kernel_pca"\nn_landmarks = 500\n'
        '[[methods]]\nname = "diffusion_maps"\nn_neighbors = 15\n',
        'memory_limit = "4GB"',
    )
    assert len(load_suite(fixed).jobs()) == 2
    with pytest.raises(ValueError, match="dense n x n distances and kernel"):
        load_suite(
            write_suite(
                tmp_path,
                '[[datasets]]\nname = "swiss_roll"\nn = 60000\n',
                '[[methods]]\nname = "diffusion_maps"\n',
                'memory_limit = "4GB"',
            )
        )


def test_a_file_too_large_for_the_limit_is_counted_from_its_header(tmp_path, capsys):
    np.save(tmp_path / "wide.npy", np.zeros((2000, 3000)))
    suite = write_suite(
        tmp_path, '[[datasets]]\nfile = "wide.npy"\n', PCA_TABLE, 'memory_limit = "100MB"'
    )
    # 3 copies x 8 bytes x 2000 x 3000 = 137 MiB of data alone.
    refused(capsys, suite, tmp_path / "r", "n = 2000, D = 3000", "needs about 137.3 MB")


@pytest.mark.parametrize(
    "estimator, method, params",
    [
        (KernelPCA(kernel="rbf", bandwidth=1.0), "kernel_pca", {"n_landmarks": None}),
        (DiffusionMaps(n_neighbors=None, bandwidth=1.0), "diffusion_maps", {"n_neighbors": None}),
    ],
)
def test_the_estimate_is_a_lower_bound_of_what_the_fit_allocates(estimator, method, params):
    # Measured with tracemalloc, which numpy reports its array allocations to.
    n, d = 1200, 3
    X = np.random.default_rng(0).normal(size=(n, d))
    need = memory_need(method, params, n, d)
    tracemalloc.start()
    try:
        estimator.fit(X)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    dense_part = need.nbytes - 3 * 8 * n * d
    assert dense_part >= 8 * n * n
    assert peak >= dense_part


@pytest.mark.parametrize(
    "keys",
    [
        {},
        {"labels": "bed"},
        {"labels": "bed", "drop": ["light"]},
        {"labels": "bed", "keep": ["light"]},
        {"features": ["soil", "light"]},
    ],
)
def test_the_size_read_from_the_header_is_what_a_job_loads(keys, sensors):
    # The memory estimate's n and D, from the header alone, against the loaded dataset.
    from lowdim.datasets import load
    from lowdim.run.suite_checks import file_size

    spec = {"file": str(sensors), "labels": None, **keys}
    if "bed" not in (keys.get("labels"), *keys.get("keep", [])):
        spec["drop"] = [*keys.get("drop", []), "bed"]
    if "features" in keys:
        spec.pop("drop", None)
    data = load({k: v for k, v in spec.items() if v is not None})
    assert file_size(spec, "t") == (data.n_samples, data.n_features)
