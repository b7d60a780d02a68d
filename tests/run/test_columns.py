"""What compare says about a file's columns: one sentence per finding, nothing done silently."""

from __future__ import annotations

import numpy as np

from lowdim.run.columns import column_findings


def test_spreads_that_differ_more_than_ten_fold_are_named():
    rng = np.random.default_rng(0)
    X = np.column_stack([rng.normal(0, 100.0, 200), rng.normal(0, 1.0, 200)])
    (text,) = column_findings(X, ["pressure_pa", "ratio"])
    # sd ratio about 100 (sample sds of N(0, 100) and N(0, 1) on 200 draws)
    assert "pressure_pa" in text and "ratio" in text and "--scale standard" in text
    assert "nothing was rescaled" in text
    (done,) = column_findings(X, ["pressure_pa", "ratio"], scale="robust")
    assert "--scale robust puts them on one footing" in done
    assert column_findings(X[:, :1] * [1.0], ["pressure_pa"]) == []


def test_skewed_counts_and_identical_columns():
    rng = np.random.default_rng(1)
    counts = rng.poisson(0.3, 300).astype(float)  # skewness 1/sqrt(0.3) = 1.8 in theory
    counts[:5] = 40.0  # a long tail pushes the skewness well above 2
    X = np.column_stack([counts, rng.normal(5, 1, 300), rng.normal(5, 1, 300)])
    X[:, 2] = X[:, 1]
    findings = column_findings(X, ["reads", "depth", "depth_copy"])
    assert any("skewed counts" in f and "reads" in f and "--log1p" in f for f in findings)
    assert any("depth and depth_copy" in f for f in findings)
    applied = column_findings(X, ["reads", "depth", "depth_copy"], log1p=True)
    assert any("--log1p was applied" in f for f in applied)


def test_constant_columns_the_reader_dropped_are_reported():
    X = np.random.default_rng(2).normal(size=(50, 2))
    (text,) = column_findings(X, ["a", "b"], dropped=["always_zero"])
    assert "always_zero" in text and "left out" in text
