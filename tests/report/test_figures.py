"""The palette's legibility and each figure on small tidy inputs."""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from lowdim.analysis.curves import loglog_slope
from lowdim.report import figures as plots

PNG = b"\x89PNG\r\n\x1a\n"


def _linear(hex_colour: str) -> np.ndarray:
    # sRGB transfer function (IEC 61966-2-1)
    c = np.array([int(hex_colour[i : i + 2], 16) for i in (1, 3, 5)]) / 255.0
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(lin: np.ndarray) -> np.ndarray:
    # CIE 1976 L*a*b* from linear sRGB, D65 white (the CIE formulas)
    m = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    x, y, z = m @ lin / np.array([0.95047, 1.0, 1.08883])

    def f(t: float) -> float:
        return np.cbrt(t) if t > (6 / 29) ** 3 else t / (3 * (6 / 29) ** 2) + 4 / 29

    return np.array([116 * f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))])


# Machado, Oliveira & Fernandes 2009, severity 1.0 matrices (from memory) on linear RGB.
DEUTERANOPIA = np.array(
    [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.01182, 0.04294, 0.968881],
    ]
)
PROTANOPIA = np.array(
    [
        [0.152286, 1.052583, -0.204868],
        [0.114503, 0.786281, 0.099216],
        [-0.003882, -0.048116, 1.051998],
    ]
)


def test_palette_reads_in_greyscale() -> None:
    lightness = [_lab(_linear(c))[0] for c in plots.PALETTE]
    steps = np.diff(lightness)
    # strictly lighter colour after colour, at least 6 L* apart, so grey prints keep them apart
    assert np.all(steps >= 6.0), lightness


@pytest.mark.parametrize("matrix", [DEUTERANOPIA, PROTANOPIA], ids=["deuteranopia", "protanopia"])
def test_palette_survives_red_green_colour_blindness(matrix: np.ndarray) -> None:
    seen = [_lab(np.clip(matrix @ _linear(c), 0, 1)) for c in plots.PALETTE]
    closest = min(np.linalg.norm(a - b) for a, b in itertools.combinations(seen, 2))
    assert closest > 12.0  # CIELAB delta E; about 2.3 is a just-noticeable difference


def test_log_log_slope_of_a_power_law_is_its_exponent() -> None:
    n = np.array([100, 200, 400, 800])
    assert loglog_slope(n, 3e-6 * n**2.0) == pytest.approx(2.0)  # exact: log y = 2 log n + c
    assert loglog_slope(n, 5.0 * n) == pytest.approx(1.0)
    assert math.isnan(loglog_slope(np.array([100, 100]), np.array([1.0, 2.0])))


def _is_png(path: Path | None) -> bool:
    return path is not None and path.read_bytes()[:8] == PNG and path.stat().st_size > 2000


def test_every_figure_draws_and_skips_empty_input(tmp_path: Path) -> None:
    rng = np.random.default_rng(0)
    methods = ["pca", "laplacian_eigenmaps", "<b>odd</b> label"]
    gaps = pd.DataFrame(
        [(d, m, "rnx_auc", rng.random()) for d in ("A", "B") for m in methods],
        columns=["dataset", "method", "criterion", "gap"],
    )
    assert _is_png(plots.gap_heatmap(gaps, "rnx_auc", methods, tmp_path / "h.png"))
    assert plots.gap_heatmap(gaps, "stress", methods, tmp_path / "none.png") is None

    curves = pd.DataFrame(
        [(d, m, k, 1 / k) for d in ("A", "B") for m in methods for k in (1, 2, 5, 10, 30)],
        columns=["dataset", "method", "k", "mean"],
    )
    assert _is_png(plots.rnx_curves(curves, tmp_path / "r.png"))

    ranks = {"pca": 2.6, "laplacian_eigenmaps": 1.2, "kernel_pca": 2.2}
    assert _is_png(plots.critical_difference_diagram(ranks, 1.1, tmp_path / "cd.png", "t"))
    stamped = plots.critical_difference_diagram(
        ranks, 1.1, tmp_path / "cd2.png", "t", stamp="not significant (p = 0.40)"
    )
    assert _is_png(stamped) and stamped.read_bytes() != (tmp_path / "cd.png").read_bytes()
    assert plots.critical_difference_diagram({"pca": 1.0}, 1.0, tmp_path / "x.png", "t") is None

    bw = pd.DataFrame(
        [
            ("kernel_pca", "", "A", f"k({s})", s, "", math.nan, 0.5 - abs(math.log(s)) / 10)
            for s in (0.25, 1.0, 4.0)
        ]
        + [
            ("kernel_pca", "", "A", "k(median)", math.nan, "median", 1.5, 0.45),
            ("kernel_pca", "", "A", "k(local)", math.nan, "local", math.nan, 0.4),
        ],
        columns=["family", "held", "dataset", "method", "bandwidth", "rule", "picked", "score"],
    )
    assert _is_png(plots.bandwidth_sensitivity(bw, "rnx_auc", tmp_path / "bw.png"))
    # Rules alone with no recorded sigma leave nothing to place on a log axis: no figure.
    rules_only = bw[bw["rule"] == "local"]
    assert plots.bandwidth_sensitivity(rules_only, "rnx_auc", tmp_path / "none.png") is None

    scaling = pd.DataFrame(
        [(m, n, 1e-6 * n**2, 10 + n / 100) for m in methods for n in (100, 1000, 10000)],
        columns=["method", "n_samples", "fit_seconds", "peak_mb"],
    )
    fits = pd.DataFrame(
        [(m, "fit_seconds", 2.0, 3) for m in methods],
        columns=["method", "quantity", "slope", "n_points"],
    )
    assert _is_png(plots.scaling_curves(scaling, fits, tmp_path / "s.png"))
    stops = pd.DataFrame(
        [("pca", 30000, "memory"), ("laplacian_eigenmaps", 10000, "timeout")],
        columns=["method", "n_samples", "status"],
    )
    assert _is_png(plots.scaling_curves(scaling, fits, tmp_path / "s2.png", stops))

    breakdown = pd.DataFrame(
        [
            ("swiss_roll", "noise", "", m, "rnx_auc", [0.0, 0.1, 0.3], [0.6, 0.5, s], 0.6, b, "")
            for m, s, b in zip(methods, [0.2, 0.55, math.nan], [0.3, math.nan, 0.3], strict=True)
        ],
        columns=[
            "dataset",
            "axis",
            "held",
            "method",
            "criterion",
            "values",
            "scores",
            "best",
            "breakdown",
            "note",
        ],
    )
    assert _is_png(plots.breakdown_curves(breakdown, 0.8, tmp_path / "b.png"))

    panels = [
        {
            "dataset": d,
            "method": m,
            "Y": rng.standard_normal((40, 2)),
            "colour": {"A": np.repeat([0, 1], 20), "B": None, "C": np.linspace(0, 1, 40)}[d],
            "kind": {"A": "labels", "B": "order", "C": "truth"}[d],
        }
        for d in ("A", "B", "C")
        for m in methods
    ]
    assert _is_png(plots.embedding_gallery(panels, tmp_path / "g.png"))
    assert plots.embedding_gallery([], tmp_path / "none.png") is None
    assert not list(tmp_path.glob(".*"))  # no temporary files left
    # every output is readable by others (0644), whatever the umask
    assert {p.stat().st_mode & 0o777 for p in tmp_path.glob("*.png")} == {0o644}
