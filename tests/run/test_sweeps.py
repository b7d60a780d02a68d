"""The comparison's candidate configurations."""

from __future__ import annotations

import pytest

from lowdim.errors import InputError
from lowdim.run.sweeps import method_tables, neighbour_grid, select_methods


def _labels(tables):
    return [t.get("label", t.get("name")) for t in tables]


def test_each_sweep_is_a_superset_of_the_one_before():
    sizes = [len(method_tables(s, 10.0, 500)) for s in ("quick", "standard", "full")]
    assert sizes == sorted(sizes) and sizes[0] < sizes[-1]


def test_fixed_bandwidths_are_labelled_as_multiples_of_the_median_distance():
    tables = method_tables("standard", 19.075, 500)
    fixed = [t for t in tables if isinstance(t.get("bandwidth"), float)]
    assert fixed and all("× median distance (" in t["label"] for t in fixed)
    four = next(
        t
        for t in fixed
        if t["name"] == "kernel_pca" and t["label"].startswith("kernel_pca(bandwidth=4 ")
    )
    assert four["bandwidth"] == pytest.approx(76.3)  # 4 x 19.075 to three significant figures
    assert four["label"] == "kernel_pca(bandwidth=4 × median distance (76.3))"


def test_neighbour_counts_are_capped_by_the_rows():
    assert neighbour_grid("standard", 500) == [5, 10, 30]
    assert neighbour_grid("standard", 12) == [5, 10]
    assert neighbour_grid("full", 1000) == [5, 10, 20, 30, 50]


def test_methods_restricts_the_candidates_and_words_a_wrong_name():
    tables = method_tables("quick", 1.0, 100)
    kept = select_methods(tables, ["pca", "diffusion_maps"])
    assert {t["name"] for t in kept} == {"pca", "diffusion_maps"}
    with pytest.raises(InputError, match="did you mean 'kernel_pca'"):
        select_methods(tables, ["kernel_pc"])
