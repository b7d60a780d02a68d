"""``lowdim compare``'s plan: the resamples, the sweep, the context kept for the report."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from compare_data import proofing_cabinet
from scipy.spatial.distance import pdist

from lowdim.errors import InputError
from lowdim.run.compare import (
    FRACTION,
    CompareOptions,
    default_out_dir,
    graph_components,
    plan_comparison,
)


@pytest.fixture
def cabinet(tmp_path):
    path = tmp_path / "proofing cabinet.csv"
    proofing_cabinet().to_csv(path, index=False)
    return path


def test_plan_resamples_rows_and_scales_bandwidths_to_the_data(cabinet):
    plan = plan_comparison(cabinet, CompareOptions(labels="stage"))
    tables = plan.suite["datasets"]
    # five draws of 80 % of the 150 rows, each with its own seed, as the blocks
    assert [t["subsample"] for t in tables] == [120] * 5
    assert [t["subsample_seed"] for t in tables] == [0, 1, 2, 3, 4]
    assert plan.resample_size == round(FRACTION * 150)
    methods = plan.suite["methods"]
    kernel = [t for t in methods if t["name"] == "kernel_pca"]
    assert kernel[0]["grid"]["bandwidth"] == ["median", "local", "kernel_sum"]
    # The fixed bandwidths are multiples of the median distance between the rows of a sample,
    # here computed independently with scipy.spatial.distance.pdist on every row.
    X = proofing_cabinet()[["co2_ppm", "rise_mm", "dough_temp", "humidity"]].to_numpy()
    median = np.median(pdist(X))
    fixed = [t["bandwidth"] for t in kernel[1:]]
    np.testing.assert_allclose(
        fixed, [0.25 * median, 0.5 * median, 2 * median, 4 * median], rtol=0.05
    )
    assert kernel[-1]["label"].startswith("kernel_pca(bandwidth=4 × median distance (")
    graph = next(t for t in methods if t["name"] == "laplacian_eigenmaps")
    assert graph["grid"]["n_neighbors"] == [5, 10, 30]
    families = plan.context["candidates"]
    assert families[:5] == [
        "pca",
        "classical_mds",
        "kernel_pca",
        "laplacian_eigenmaps",
        "diffusion_maps",
    ]
    # the fast peers join the standard sweep (lowdim.methods.peers: isomap, the LLE forms)
    assert "isomap" in families and "lle" in families
    assert "knn_accuracy" not in plan.context["missing"]
    assert str(plan.out_dir) == str(default_out_dir(cabinet)) == "results/compare-proofing_cabinet"


def test_small_and_large_files(tmp_path):
    rng = np.random.default_rng(0)
    small = tmp_path / "tiny.csv"
    pd.DataFrame(rng.normal(size=(12, 3)), columns=list("abc")).to_csv(small, index=False)
    plan = plan_comparison(small, CompareOptions(sweep="quick"))
    # resamples of 10 rows: graphs need n_neighbors <= n - 2; trustworthiness needs K < n / 2
    graph = next(t for t in plan.suite["methods"] if t["name"] == "laplacian_eigenmaps")
    assert graph["grid"]["n_neighbors"] == [8]
    assert plan.suite["suite"]["neighbors"] == [3]
    assert "knn_accuracy" in plan.context["missing"]  # no labels given
    big = tmp_path / "big.csv"
    pd.DataFrame(rng.normal(size=(130, 3)), columns=list("abc")).to_csv(big, index=False)
    plan = plan_comparison(big, CompareOptions(max_rows=50))
    assert [t["subsample"] for t in plan.suite["datasets"]] == [50] * 5


def test_duplicates_and_disconnected_graph_are_found(tmp_path):
    # Two tight clusters 1000 apart, 10 points each: with 5 neighbours no edge can cross
    # (an exact fact of the kNN graph), so it has 2 components.
    rng = np.random.default_rng(1)
    X = np.vstack([rng.normal(0, 1, (10, 2)), rng.normal(1000, 1, (10, 2))])
    assert graph_components(X, [5]) == {5: 2}
    path = tmp_path / "clusters.csv"
    rows = np.vstack([X, X[:3]])
    pd.DataFrame(rows, columns=["x", "y"]).to_csv(path, index=False)
    plan = plan_comparison(path, CompareOptions(sweep="quick"))
    assert plan.context["n_duplicates"] == 3


def test_preprocessing_and_columns_reach_the_suite(cabinet):
    options = CompareOptions(
        labels="stage", keep=("humidity",), scale="robust", log1p=False, pca_first=2
    )
    plan = plan_comparison(cabinet, options)
    spec = plan.suite["datasets"][0]
    assert spec["scale"] == "robust" and spec["pca_first"] == 2
    assert spec["keep"] == ["humidity"]  # kept columns are never features
    assert plan.context["options"]["keep"] == ["humidity"]
    assert plan.context["n_features"] == 3


@pytest.mark.parametrize(
    ("options", "message"),
    [
        (CompareOptions(scale="zscore"), "--scale must be one of none, standard, robust, minmax"),
        (CompareOptions(pca_first=1), "--pca-first must be an integer of at least 2, got 1"),
        (CompareOptions(max_rows=5), "--max-rows must be an integer of at least 10, got 5"),
        (CompareOptions(labels="stage", methods=("pcaa",)), "did you mean 'pca'"),
        (CompareOptions(extra=("sklearn.manifold.Isomap",)), "must name a class as module:Class"),
        (
            CompareOptions(keep=("co2_ppm",), features=("co2_ppm", "rise_mm")),
            "--keep and --features both name co2_ppm",
        ),
    ],
)
def test_bad_options_are_one_line(cabinet, options, message):
    with pytest.raises(InputError, match=message.replace("(", r"\(").replace(")", r"\)")):
        plan_comparison(cabinet, options)


def test_one_feature_column_is_refused(tmp_path):
    path = tmp_path / "one.csv"
    pd.DataFrame({"reading": np.arange(20.0), "id": np.arange(20)}).to_csv(path, index=False)
    with pytest.raises(InputError, match="has one feature column"):
        plan_comparison(path, CompareOptions(drop=("id",)))


def test_a_slow_peer_named_in_methods_joins_the_standard_sweep(cabinet):
    plan = plan_comparison(cabinet, CompareOptions(labels="stage", methods=("pca", "tsne")))
    names = [t.get("name") for t in plan.suite["methods"]]
    assert names == ["pca", "tsne"]
    left_out = dict(map(tuple, plan.context["left_out"]))
    assert "tsne" not in left_out and "umap" in left_out


def test_a_named_peer_that_cannot_run_says_what_to_install(cabinet, monkeypatch):
    from lowdim.methods import get_method

    umap = get_method("umap")
    monkeypatch.setattr(
        umap,
        "unavailable",
        classmethod(lambda cls: "needs umap-learn, which is not installed: pip install 'x'"),
    )
    with pytest.raises(InputError) as caught:
        plan_comparison(cabinet, CompareOptions(labels="stage", methods=("umap",)))
    assert str(caught.value) == (
        "--methods names 'umap', which cannot run here: needs umap-learn, which is not "
        "installed: pip install 'x'"
    )
