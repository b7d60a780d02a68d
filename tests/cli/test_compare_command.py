"""``lowdim compare``: the plan it builds, and the whole command end to end."""

import json
import re
import shlex
import subprocess
import sys
import textwrap

import pandas as pd
import pytest
from compare_data import proofing_cabinet


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
    frame = pd.read_csv(cabinet)
    frame.insert(0, "batch_id", [f"B{i:03d}" for i in range(len(frame))])
    frame.to_csv(cabinet, index=False)
    out = tmp_path / "results"
    proc = subprocess.run(
        [sys.executable, "-m", "lowdim", "compare", str(cabinet), "--quick", "--quiet"]
        + ["--drop", "stage", "--keep", "batch_id", "--plugin", str(plugin)]
        + ["--out", str(out), "--jobs", "2"],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    assert "3 resamples of 120 rows" in proc.stderr
    text = proc.stdout
    assert "Ranked by overall (mean rank)" in text
    table = text.split("Recommendation:")[0]
    # 17 settings in the quick sweep: pca, classical_mds, 4 kernel_pca bandwidths, 1
    # laplacian_eigenmaps neighbour count, 3 diffusion_maps bandwidths, one setting of each
    # of the 6 fast peers (isomap, lle, lle_modified, lle_hessian, ltsa, smacof), the plugin.
    rows = [line for line in table.splitlines() if re.match(r"\s*=?\d+\s", line)]
    assert len(rows) == 17
    assert any(r.split()[1].startswith("isomap") for r in rows)
    assert any("first_two_readings" in r for r in rows)
    assert any("kernel_pca(bandwidth=kernel_sum)" in r for r in rows)
    assert any("× median distance (" in r for r in rows)
    # Resampling rows gives a deterministic method a spread of its own (the file is noisy).
    pca = next(r for r in rows if re.search(r"\bpca\s", r))
    spreads = [float(s) for s in re.findall(r"± (\d+\.\d+)", pca)]
    assert spreads and max(spreads) > 0
    recommendation = text.split("Recommendation:")[1]
    winner = json.loads((out / "stats.json").read_text())["winner"]
    assert recommendation.lstrip().startswith(f"- Use {winner}.")
    assert "3 resamples of the file as blocks" in recommendation
    assert "ranks first (or ties for first) in" in recommendation
    assert "Refitted on 150 rows" in recommendation  # the confirmation on the whole file
    assert "Candidates: 17 settings of 12 methods" in recommendation
    assert "left out: tsne (slow tier" in recommendation
    assert "knn_accuracy" in recommendation and "class labels" in recommendation
    assert winner in rows[0]
    assert (out / "recommendation.txt").read_text() in text
    html = (out / "report.html").read_text()
    verdict = html.index('<p class="verdict">')
    assert html[verdict:].startswith(f'<p class="verdict">{winner}')
    assert "first in" in html
    # The printed command embeds the whole file with the winner and keeps the id column.
    command = text.split("To embed the whole file with it:")[1].split("report:")[0].strip()
    argv = shlex.split(command)
    assert argv[:2] == ["lowdim", "embed"] and "--keep" in argv
    target = tmp_path / "embedded.csv"
    argv[argv.index("--out") + 1] = str(target)
    if "first_two_readings" in argv:
        argv += ["--plugin", str(plugin)]
    done = subprocess.run(
        [sys.executable, "-m", "lowdim", *argv[1:]], capture_output=True, text=True, timeout=120
    )
    assert done.returncode == 0, done.stderr
    embedded = pd.read_csv(target)
    assert list(embedded["batch_id"]) == list(frame["batch_id"])
    assert {"dim1", "dim2"} <= set(embedded.columns)
