"""The analysis engine on stores written through the store's API, with invented numbers.

The expected winners, places and p-values are worked out by hand from the numbers given
here; the p-values rest on exact counting arguments stated beside each check.
"""

from __future__ import annotations

import json
import math
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from lowdim.analysis.breakdown import breakdown_table
from lowdim.analysis.engine import analyse, analyse_folder
from lowdim.analysis.results import criterion_table, load_results
from lowdim.errors import InputError
from lowdim.metrics import _registry, register_metric
from lowdim.report.tables import stats_json
from lowdim.run.settings import OVERALL


def suite(datasets: list[dict], methods: list[dict], **settings) -> dict:
    head = {
        "name": "engine",
        "seeds": [0],
        "neighbors": [10],
        "metrics": ["trustworthiness", "rnx_auc"],
    }
    return {"suite": {**head, **settings}, "datasets": datasets, "methods": methods}


TWO_DATA = [{"name": "swiss_roll", "n": 60}, {"name": "s_curve", "n": 60}]
THREE = [
    {"name": "pca"},
    {"name": "laplacian_eigenmaps", "n_neighbors": 10},
    {"name": "diffusion_maps", "n_neighbors": 10},
]
QUALITY = {"pca": 0.7, "laplacian_eigenmaps": 0.9, "diffusion_maps": 0.8}


def by_family(values: dict):
    def score(job):
        q = values[job.method_spec["name"]]
        return {("trustworthiness", 10): q, ("rnx_auc", 0): q - 0.3}

    return score


def test_unanimous_rankings_of_two_datasets_are_not_significant(
    tmp_path: Path, write_suite_store
) -> None:
    # Both datasets rank the three configurations identically. The exact probability of that
    # under the null is 1/3! = 1/6 (REFERENCES.md), and no pairwise Wilcoxon p can be below
    # 0.5 with two blocks: nothing in stats.json may fall below 0.05.
    folder = write_suite_store(tmp_path / "u", suite(TWO_DATA, THREE), by_family(QUALITY))
    an = analyse_folder(folder)
    assert an.winner == "laplacian_eigenmaps(n_neighbors=10)"
    assert an.order[1:] == ["diffusion_maps(n_neighbors=10)", "pca"]
    assert an.tests[OVERALL].friedman.p_value == pytest.approx(1 / 6)
    assert not an.tests[OVERALL].rejects
    data = json.loads(stats_json(an))
    p_values = []
    for entry in data["criteria"].values():
        f = entry["friedman"]
        p_values += [f["p_value"], f["chi2_p"]] + (
            [f["iman_davenport_p"]] if f["iman_davenport_p"] is not None else []
        )
        for pair in (entry["pairwise"] or {}).get("pairs", []):
            p_values += [pair["p_value"], pair["p_holm"]]
    assert p_values and min(p_values) >= 0.05
    assert data["winner"] == an.winner and data["blocks"]["n"] == 2


def test_a_tie_goes_to_the_simpler_method(tmp_path: Path, write_suite_store) -> None:
    # PCA and classical MDS give the same scores (on Euclidean data they are the same
    # embedding, REFERENCES.md); the tie-break names PCA first and both share place =1.
    methods = [{"name": "classical_mds"}, {"name": "pca"}, {"name": "kernel_pca"}]
    values = {"pca": 0.9, "classical_mds": 0.9, "kernel_pca": 0.5}
    folder = write_suite_store(tmp_path / "t", suite(TWO_DATA, methods), by_family(values))
    an = analyse_folder(folder)
    assert an.order == ["pca", "classical_mds", "kernel_pca"]
    assert an.position == {"pca": "=1", "classical_mds": "=1", "kernel_pca": "3"}
    assert an.tied_with_winner() == ["pca", "classical_mds"]


def test_a_configuration_that_failed_takes_the_last_rank_there(
    tmp_path: Path, write_suite_store
) -> None:
    def score(job):
        if (
            job.method_spec["name"] == "laplacian_eigenmaps"
            and job.dataset_spec["name"] == "s_curve"
        ):
            return "ran out of memory"
        return by_family(QUALITY)(job)

    folder = write_suite_store(tmp_path / "f", suite(TWO_DATA, THREE), score)
    an = analyse_folder(folder)
    ranks = an.tests["trustworthiness@10"].mean_ranks
    # swiss_roll: LE 1, DM 2, PCA 3; s_curve: DM 1, PCA 2, LE last (3)
    assert ranks["laplacian_eigenmaps(n_neighbors=10)"] == pytest.approx(2.0)
    assert ranks["diffusion_maps(n_neighbors=10)"] == pytest.approx(1.5)
    assert an.winner == "diffusion_maps(n_neighbors=10)"
    assert len(an.failures) == 1


def test_one_dataset_gives_no_test_and_two_configurations_work(
    tmp_path: Path, write_suite_store
) -> None:
    folder = write_suite_store(
        tmp_path / "one", suite(TWO_DATA[:1], THREE[:2]), by_family(QUALITY)
    )
    an = analyse_folder(folder)
    tests = an.tests[OVERALL]
    assert tests.n_blocks == 1 and tests.n_configurations == 2
    assert not tests.rejects and tests.friedman.p_value == pytest.approx(1.0)
    assert an.winner == "laplacian_eigenmaps(n_neighbors=10)"


def test_the_record_not_the_registry_or_the_suite_file_drives_the_analysis(
    tmp_path: Path, write_suite_store
) -> None:
    # A criterion that a plugin provided, lower is better, gone from the registry by report
    # time: its direction comes from the stored settings record.
    @register_metric(
        "plugin_spread",
        higher_is_better=False,
        source="a test plugin",
        description="a spread a plugin measures",
    )
    def plugin_spread(X, Y, *, k=None, labels=None, truth=None) -> float:
        return 0.0

    try:
        data = suite(
            TWO_DATA,
            THREE,
            metrics=["trustworthiness", "plugin_spread"],
            headline=["plugin_spread"],
        )

        def score(job):
            q = QUALITY[job.method_spec["name"]]
            return {("trustworthiness", 10): q, ("plugin_spread", 0): q}

        folder = write_suite_store(tmp_path / "p", data, score)
    finally:
        del _registry._METRICS["plugin_spread"]
    an = analyse_folder(folder)
    # lower is better, so the lowest value (pca, 0.7) wins
    assert an.headline == ["plugin_spread"] and an.winner == "pca"


def test_only_the_latest_run_is_analysed(tmp_path: Path, write_suite_store) -> None:
    # The same folder, a suite edited and run again: the store keeps the earlier jobs but the
    # analysis reads only those the latest run planned.
    folder = tmp_path / "again"
    write_suite_store(folder, suite(TWO_DATA, THREE), by_family(QUALITY))
    write_suite_store(folder, suite(TWO_DATA[:1], THREE[:2]), by_family(QUALITY))
    with sqlite3.connect(folder / "store.sqlite") as con:
        (stored,) = con.execute("SELECT COUNT(*) FROM jobs").fetchone()
    results = load_results(folder)
    assert stored == 6 and len(results.jobs) == 2
    assert set(results.scores["job_id"]) <= set(results.jobs["job_id"])


def test_selection_override_is_checked(tmp_path: Path, write_suite_store) -> None:
    folder = write_suite_store(tmp_path / "s", suite(TWO_DATA, THREE), by_family(QUALITY))
    assert analyse_folder(folder, selection="rnx_auc").selection == "rnx_auc"
    with pytest.raises(InputError, match="did you mean 'rnx_auc'"):
        analyse_folder(folder, selection="rnx_aux")


def test_seed_stability_compares_jobs_with_the_same_data_fingerprint(
    tmp_path: Path, write_store
) -> None:
    folder = write_store(tmp_path / "stab", small=True)
    results = load_results(folder)
    # Procrustes removes rotation, reflection and scale (Gower 1975; scipy.spatial.procrustes),
    # so a rotated, scaled copy of the first seed's embedding has disparity 0.
    jobs = results.jobs.sort_values("seed")
    first = jobs[jobs["config"] == "pca"].iloc[0]
    second = jobs[(jobs["config"] == "pca") & (jobs["data"] == first["data"])].iloc[1]
    Y = np.load(results.embedding_path(first["job_id"]))
    t = 0.7
    R = np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])
    np.save(results.embedding_path(second["job_id"]), 3.0 * Y @ R.T + 5.0)
    an = analyse(results)
    row = an.stability.set_index(["dataset", "method"]).loc[(first["data"], "pca")]
    assert row["disparity"] == pytest.approx(0.0, abs=1e-12)
    with sqlite3.connect(folder / "store.sqlite") as con:
        con.execute("UPDATE jobs SET data_fingerprint = job_id")  # seeds drew other points
    again = analyse_folder(folder).stability
    assert again["disparity"].isna().all() and again["note"].str.contains("anew").all()


def test_breakdown_curves_need_two_values_along_the_axis(tmp_path: Path, write_store) -> None:
    # Two stress axes on one dataset, not crossed (as a suite with one table per axis writes
    # them): a cell holding one axis value has no curve, so it gets no breakdown row.
    folder = write_store(tmp_path / "axes")
    with sqlite3.connect(folder / "store.sqlite") as con:
        rows = con.execute("SELECT job_id, dataset_params FROM jobs").fetchall()
        for job_id, params in rows:
            spec = json.loads(params)
            if spec.get("name") == "swiss_roll":
                spec["density"] = 2.0 if spec.get("noise") == 0.0 else 0.0
                con.execute(
                    "UPDATE jobs SET dataset_params = ? WHERE job_id = ?",
                    (json.dumps(spec), job_id),
                )
    results = load_results(folder)
    board = breakdown_table(results, criterion_table(results), {"trustworthiness@5": True})
    assert not board.empty
    assert all(len(v) >= 2 for v in board["values"])


def test_a_folder_without_a_store_or_a_record_is_an_input_error(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no results store"):
        load_results(tmp_path)


def test_share_of_firsts_and_the_winners_lead_per_block(tmp_path: Path, write_suite_store) -> None:
    # By hand: trustworthiness by dataset (rnx_auc 0.3 below):
    #   swiss_roll: pca 0.70, LE 0.90, DM 0.80   -> LE first, lead over DM +0.10
    #   s_curve:    pca 0.70, LE 0.90, DM 0.85   -> LE first, lead +0.05
    #   two_moons:  pca 0.70, LE 0.80, DM 0.90   -> DM first, lead -0.10
    table = {
        "swiss_roll": {"pca": 0.7, "laplacian_eigenmaps": 0.9, "diffusion_maps": 0.8},
        "s_curve": {"pca": 0.7, "laplacian_eigenmaps": 0.9, "diffusion_maps": 0.85},
        "two_moons": {"pca": 0.7, "laplacian_eigenmaps": 0.8, "diffusion_maps": 0.9},
    }

    def score(job):
        q = table[job.dataset_spec["name"]][job.method_spec["name"]]
        return {("trustworthiness", 10): q, ("rnx_auc", 0): q - 0.3}

    data = [*TWO_DATA, {"name": "two_moons", "n": 60}]
    an = analyse_folder(write_suite_store(tmp_path / "c", suite(data, THREE), score))
    le, dm = "laplacian_eigenmaps(n_neighbors=10)", "diffusion_maps(n_neighbors=10)"
    assert an.order[:2] == [le, dm]
    share = an.first_share()
    assert share[le] == pytest.approx(2 / 3) and share[dm] == pytest.approx(1 / 3)
    assert share["pca"] == 0.0
    assert an.effect == "rnx_auc"  # the first headline criterion, in its own units
    np.testing.assert_allclose(sorted(an.lead()), [-0.10, 0.05, 0.10], atol=1e-12)
