"""``lowdim compare``: the plan it builds, and the whole command end to end."""

import json
import re
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import pdist

from lowdim.run.compare import default_out_dir, graph_components, plan_comparison


def proofing_cabinet(n: int = 150, seed: int = 3) -> pd.DataFrame:
    """A made-up bakery's proofing cabinet: each row is one dough reading.

    The hidden fermentation phase t winds the CO2 and rise readings round a spiral (a 1-D
    curve in the plane, lifted by temperature), so neighbours along the curve matter.
    """
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1.0, 3.0 * np.pi, n))
    frame = pd.DataFrame(
        {
            "co2_ppm": t * np.cos(t) + rng.normal(0, 0.05, n),
            "rise_mm": t * np.sin(t) + rng.normal(0, 0.05, n),
            "dough_temp": 0.3 * t + rng.normal(0, 0.05, n),
            "humidity": rng.normal(0.0, 0.05, n),
        }
    )
    frame["stage"] = np.where(t < 4, "early", np.where(t < 7, "mid", "late"))
    return frame


@pytest.fixture
def cabinet(tmp_path):
    path = tmp_path / "proofing cabinet.csv"
    proofing_cabinet().to_csv(path, index=False)
    return path


PLUGIN = textwrap.dedent(
    """
    import numpy as np
    from sklearn.base import BaseEstimator, TransformerMixin
    from lowdim.methods import register_method

    @register_method("first_two_readings")
    class FirstTwoReadings(TransformerMixin, BaseEstimator):
        '''Keep the first two columns, centred: a naive baseline.'''

        def __init__(self, n_components=2):
            self.n_components = n_components

        def fit(self, X, y=None):
            self.mean_ = np.asarray(X, float)[:, : self.n_components].mean(axis=0)
            return self

        def transform(self, X):
            return np.asarray(X, float)[:, : self.n_components] - self.mean_
    """
)


def test_plan_sweeps_rules_data_scaled_bandwidths_and_capped_neighbours(cabinet):
    plan = plan_comparison(cabinet, labels="stage")
    methods = plan.suite["methods"]
    assert [t["name"] for t in methods] == [
        "pca",
        "classical_mds",
        "kernel_pca",
        "laplacian_eigenmaps",
        "diffusion_maps",
        "diffusion_maps",
    ]
    bandwidths = methods[2]["grid"]["bandwidth"]
    assert bandwidths[:3] == ["median", "local", "kernel_sum"]
    # The fixed bandwidths are multiples of the median distance between the rows, here
    # computed independently with scipy.spatial.distance.pdist.
    X = proofing_cabinet()[["co2_ppm", "rise_mm", "dough_temp", "humidity"]].to_numpy()
    median = np.median(pdist(X))
    expected = [0.25 * median, 0.5 * median, 2 * median, 4 * median]
    np.testing.assert_allclose(bandwidths[3:], expected, rtol=5e-3)
    assert methods[3]["grid"]["n_neighbors"] == [5, 10, 30]
    assert plan.suite["suite"]["seeds"] == [0, 1, 2]
    assert plan.subsample is None and plan.n_samples == 150
    assert "knn_accuracy" not in plan.context["missing"]
    assert plan.out_dir == default_out_dir(cabinet)
    assert str(plan.out_dir) == "results/compare-proofing_cabinet"


def test_small_and_large_files(tmp_path):
    rng = np.random.default_rng(0)
    small = tmp_path / "tiny.csv"
    pd.DataFrame(rng.normal(size=(12, 3)), columns=list("abc")).to_csv(small, index=False)
    plan = plan_comparison(small, quick=True)
    # n = 12: graphs need n_neighbors <= n - 2; trustworthiness needs K < n / 2.
    assert plan.suite["methods"][3]["grid"]["n_neighbors"] == [10]
    assert plan.suite["suite"]["neighbors"] == [4]
    plan = plan_comparison(small)
    assert plan.suite["methods"][3]["grid"]["n_neighbors"] == [5, 10]
    assert "knn_accuracy" in plan.context["missing"]  # no labels given
    big = tmp_path / "big.csv"
    pd.DataFrame(rng.normal(size=(130, 3)), columns=list("abc")).to_csv(big, index=False)
    plan = plan_comparison(big, max_rows=50)
    tables = plan.suite["datasets"]
    assert [t["subsample"] for t in tables] == [50, 50, 50]
    assert [t["subsample_seed"] for t in tables] == [0, 1, 2]
    assert plan.subsample == 50


def test_duplicates_and_disconnected_graph_are_found(tmp_path):
    # Two tight clusters 1000 apart, 10 points each: with 5 neighbours no edge can cross
    # (an exact fact of the kNN graph), so it has 2 components.
    rng = np.random.default_rng(1)
    X = np.vstack([rng.normal(0, 1, (10, 2)), rng.normal(1000, 1, (10, 2))])
    assert graph_components(X, [5]) == {5: 2}
    path = tmp_path / "clusters.csv"
    rows = np.vstack([X, X[:3]])
    pd.DataFrame(rows, columns=["x", "y"]).to_csv(path, index=False)
    plan = plan_comparison(path, quick=True)
    assert plan.context["n_duplicates"] == 3
    assert plan.context["components"]["5"] == 2


def test_compare_end_to_end_with_a_plugin(cabinet, tmp_path):
    plugin = tmp_path / "baseline_plugin.py"
    plugin.write_text(PLUGIN)
    listed = subprocess.run(
        [sys.executable, "-m", "lowdim", "methods", "--plugin", str(plugin)],
        capture_output=True,
        text=True,
    )
    assert listed.returncode == 0, listed.stderr
    assert "first_two_readings" in listed.stdout
    out = tmp_path / "results"
    proc = subprocess.run(
        [sys.executable, "-m", "lowdim", "compare", str(cabinet), "--quick", "--quiet"]
        + ["--drop", "stage", "--plugin", str(plugin), "--out", str(out), "--jobs", "2"],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    text = proc.stdout
    assert "Ranked by overall (mean rank)" in text
    table = text.split("Recommendation:")[0]
    # 11 settings in the quick sweep: pca, classical_mds, 4 kernel_pca bandwidths, 1
    # laplacian_eigenmaps neighbour count, 3 diffusion_maps bandwidths, and the plugin.
    rows = [line for line in table.splitlines() if re.match(r"\s*=?\d+\s", line)]
    assert len(rows) == 11
    assert any("first_two_readings" in r for r in rows)
    assert any("kernel_pca(bandwidth=kernel_sum)" in r for r in rows)
    recommendation = text.split("Recommendation:")[1]
    assert recommendation.lstrip().startswith("- Use ")
    # one file, no subsamples: one block, so nothing can be tested and the text says so
    assert "nothing to test" in recommendation
    # the winner named first in the recommendation is the one of stats.json and the report
    winner = json.loads((out / "stats.json").read_text())["winner"]
    assert recommendation.lstrip().startswith(f"- Use {winner}.")
    first_row = rows[0].split()
    assert first_row[0] == "1" or first_row[0] == "=1"
    assert winner in rows[0]
    assert "knn_accuracy" in recommendation and "class labels" in recommendation
    assert (out / "store.sqlite").is_file()
    assert (out / "recommendation.txt").read_text() in text
    assert (out / "report.html").is_file()
