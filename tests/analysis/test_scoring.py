"""Ranks, summaries, the tuned view, Demšar's statistics and breakdown points."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import friedmanchisquare, rankdata

from lowdim.analysis.breakdown import breakdown_point, seed_stability
from lowdim.analysis.results import (
    Results,
    _unique_labels,
    criterion_key,
    criterion_statistics,
    mean_ranks,
    parse_criterion,
    rank_table,
    summarise,
    tuned_summary,
)
from lowdim.analysis.stats import (
    critical_difference,
    friedman_chi2_from_mean_ranks,
    friedman_test,
    iman_davenport,
    nemenyi_q,
)

# Hand-made means (higher is better), B failed on D3:
#        A     B     C
#   D1  0.9   0.8   0.7   ranks 1, 2, 3
#   D2  0.5   0.5   0.6   ranks 2.5, 2.5, 1   (A and B tie on 2 and 3: (2 + 3) / 2)
#   D3  0.3   --    0.4   ranks 2, 3, 1       (a missing score takes the last rank)
# Mean ranks: A = (1 + 2.5 + 2) / 3 = 11/6, B = (2 + 2.5 + 3) / 3 = 5/2, C = (3 + 1 + 1) / 3 = 5/3.
MEANS = {
    ("D1", "A"): 0.9,
    ("D1", "B"): 0.8,
    ("D1", "C"): 0.7,
    ("D2", "A"): 0.5,
    ("D2", "B"): 0.5,
    ("D2", "C"): 0.6,
    ("D3", "A"): 0.3,
    ("D3", "C"): 0.4,
}


def hand_table(criterion: str = "trustworthiness@10") -> pd.DataFrame:
    """Two seeds per cell, mean +- 0.05, so each mean is exactly MEANS and sd = 0.05 sqrt(2)."""
    rows = []
    for (d, m), v in MEANS.items():
        for seed, delta in ((0, -0.05), (1, 0.05)):
            rows.append(
                {
                    "dataset": d,
                    "method": m,
                    "family": m,
                    "seed": seed,
                    "criterion": criterion,
                    "value": v + delta,
                }
            )
    return pd.DataFrame(rows)


def test_summary_is_mean_and_sample_sd_over_seeds() -> None:
    s = summarise(hand_table()).set_index(["dataset", "method"])
    assert s.loc[("D1", "A"), "mean"] == pytest.approx(0.9)
    # sample sd (ddof = 1) of {v - 0.05, v + 0.05} is 0.05 * sqrt(2): exact arithmetic.
    assert s.loc[("D1", "A"), "sd"] == pytest.approx(0.05 * math.sqrt(2))
    assert s.loc[("D1", "A"), "n_seeds"] == 2


def test_ranks_and_mean_ranks_on_the_hand_made_table() -> None:
    summary = summarise(hand_table())
    ranks = rank_table(summary, "trustworthiness@10", True, ["A", "B", "C"])
    # worked by hand in the comment above MEANS
    expected = pd.DataFrame(
        [[1, 2, 3], [2.5, 2.5, 1], [2, 3, 1]], index=["D1", "D2", "D3"], columns=["A", "B", "C"]
    )
    np.testing.assert_allclose(ranks.to_numpy(), expected.to_numpy())
    mr = mean_ranks(ranks)
    assert list(mr.index) == ["C", "A", "B"]
    np.testing.assert_allclose(mr[["A", "B", "C"]], [11 / 6, 5 / 2, 5 / 3])


def test_lower_is_better_reverses_the_ranks() -> None:
    summary = summarise(hand_table("stress"))
    ranks = rank_table(summary, "stress", False, ["A", "B", "C"])
    # D1: C < B < A; D2: A = B (0.5) < C; D3: A < C, B missing last.
    np.testing.assert_allclose(ranks.to_numpy(), [[3, 2, 1], [1.5, 1.5, 3], [1, 3, 2]])


def test_statistics_use_the_hand_ranks() -> None:
    summary = summarise(hand_table())
    entry = criterion_statistics(summary, {"trustworthiness@10": True})["trustworthiness@10"]
    assert entry["n_datasets"] == 3 and entry["n_methods"] == 3
    assert entry["mean_ranks"] == pytest.approx({"A": 11 / 6, "B": 5 / 2, "C": 5 / 3})
    # scipy.stats.friedmanchisquare on the same rank rows (scipy ranks each row itself).
    ranks = np.array([[1, 2, 3], [2.5, 2.5, 1], [2, 3, 1]])
    ref = friedmanchisquare(*ranks.T)
    assert entry["friedman_chi2"] == pytest.approx(ref.statistic)
    assert entry["p_value"] == pytest.approx(ref.pvalue)


@pytest.mark.parametrize("ties", [False, True])
def test_friedman_equals_scipy(ties: bool) -> None:
    rng = np.random.default_rng(11 + ties)
    for n, k in ((5, 3), (12, 4), (30, 7)):
        values = rng.integers(0, 3, size=(n, k)) if ties else rng.standard_normal((n, k))
        if ties:
            values[0] = 1  # a fully tied row as well
        res = friedman_test(rankdata(values, axis=1))
        ref = friedmanchisquare(*values.T)  # scipy.stats.friedmanchisquare, tie-corrected
        assert res.friedman_chi2 == pytest.approx(ref.statistic, rel=1e-12)
        assert res.p_value == pytest.approx(ref.pvalue, rel=1e-10)


def test_nemenyi_q_matches_demsar_table() -> None:
    # Demšar, JMLR 7, 2006, Table 5(a), q_0.05 for k = 2 .. 10 (REFERENCES.md).
    published = [1.960, 2.343, 2.569, 2.728, 2.850, 2.949, 3.031, 3.102, 3.164]
    for k, q in zip(range(2, 11), published, strict=True):
        assert abs(nemenyi_q(k, 0.05) - q) < 2e-3, k
        # CD = q sqrt(k (k + 1) / (6 N)), Demšar eq. for the Nemenyi test
        assert critical_difference(k, 10) == pytest.approx(
            nemenyi_q(k) * math.sqrt(k * (k + 1) / 60)
        )
    # q_0.10 for k = 2 and k = 10 from the same table
    assert abs(nemenyi_q(2, 0.10) - 1.645) < 2e-3 and abs(nemenyi_q(10, 0.10) - 2.920) < 2e-3


def test_demsar_worked_example() -> None:
    # Demšar 2006, the four C4.5 variants on 14 data sets (REFERENCES.md, from memory + computed):
    # mean ranks 3.143, 2.000, 2.893, 1.964 give chi2_F = 9.28, F_F = 3.69, CD(0.05) = 1.25,
    # CD(0.10) = 1.12.
    mean = np.array([3.143, 2.000, 2.893, 1.964])
    chi2 = friedman_chi2_from_mean_ranks(mean, 14)
    assert chi2 == pytest.approx(9.28, abs=0.01)
    f, p = iman_davenport(chi2, 14, 4)
    assert f == pytest.approx(3.69, abs=0.01)
    assert 0.01 < p < 0.05  # the paper rejects at 0.05 with F(3, 39)
    assert critical_difference(4, 14, 0.05) == pytest.approx(1.25, abs=0.005)
    assert critical_difference(4, 14, 0.10) == pytest.approx(1.12, abs=0.005)


def test_iman_davenport_with_identical_rankings_is_infinite() -> None:
    # every dataset ranks the methods the same way: chi2_F = N (k - 1), the maximum (exact fact)
    ranks = np.tile([1.0, 2.0, 3.0], (6, 1))
    res = friedman_test(ranks)
    assert res.friedman_chi2 == pytest.approx(6 * 2)
    assert math.isinf(res.iman_davenport_f) and res.iman_davenport_p == 0.0


def test_breakdown_point_on_a_hand_made_curve() -> None:
    axis = [0.0, 0.1, 0.2, 0.3]
    # best 1.0; ratios 0.9, 1.0, 0.85, 0.7: the first below 0.8 is at 0.3
    assert breakdown_point(axis, [0.9, 1.0, 0.85, 0.7], True, 0.8) == 0.3
    # never below 0.8 of the best
    assert breakdown_point(axis, [0.9, 1.0, 0.85, 0.81], True, 0.8) is None
    # lower is better: best 0.1; quality 0.1 / s = 1, 0.833, 0.5: breaks at the third value
    assert breakdown_point(axis[:3], [0.1, 0.12, 0.2], False, 0.8) == 0.2
    # a failed job (NaN) counts as broken there
    assert breakdown_point(axis, [0.9, math.nan, 0.85, 0.9], True, 0.8) == 0.1
    # a non-positive best gives no defined ratio
    assert breakdown_point(axis, [-0.2, -0.1, -0.3, -0.5], True, 0.8) is None


def test_tuned_view_picks_the_best_configuration_by_the_selection() -> None:
    rows = [
        # dataset, configuration, family, criterion, mean
        ("D1", "k(s=1)", "k", "rnx_auc", 0.3),
        ("D1", "k(s=2)", "k", "rnx_auc", 0.5),
        ("D1", "k(s=1)", "k", "stress", 0.2),
        ("D1", "k(s=2)", "k", "stress", 0.4),
        ("D2", "k(s=1)", "k", "rnx_auc", 0.6),
        ("D2", "k(s=2)", "k", "rnx_auc", 0.4),
        ("D2", "k(s=1)", "k", "stress", 0.1),
        ("D2", "k(s=2)", "k", "stress", 0.3),
        ("D1", "p", "p", "rnx_auc", 0.45),
        ("D1", "p", "p", "stress", 0.3),
    ]
    summary = pd.DataFrame(rows, columns=["dataset", "method", "family", "criterion", "mean"])
    summary = summary.assign(sd=np.nan, n_seeds=1)
    tuned = tuned_summary(summary, "rnx_auc", True)
    picks = tuned.drop_duplicates(["dataset", "method"]).set_index(["dataset", "method"])
    assert picks.loc[("D1", "k"), "configuration"] == "k(s=2)"  # 0.5 > 0.3
    assert picks.loc[("D2", "k"), "configuration"] == "k(s=1)"  # 0.6 > 0.4
    # the pick's other criteria come along: stress of k(s=2) on D1
    got = tuned[
        (tuned["dataset"] == "D1") & (tuned["method"] == "k") & (tuned["criterion"] == "stress")
    ]
    assert got["mean"].iloc[0] == 0.4


def test_criterion_keys_round_trip() -> None:
    assert criterion_key("trustworthiness", 10) == "trustworthiness@10"
    assert criterion_key("rnx_auc", 0) == "rnx_auc"
    assert parse_criterion("trustworthiness@10") == ("trustworthiness", 10)
    assert parse_criterion("rnx_auc") == ("rnx_auc", 0)


def test_one_label_over_several_specs_is_made_unique() -> None:
    labels = pd.Series(["roll", "roll", "roll", "moons"])
    specs = pd.Series([{"noise": 0.1}, {"noise": 0.3}, {"noise": 0.1}, {"noise": 0.1}])
    out = _unique_labels(labels, specs)
    assert list(out) == ["roll [noise=0.1]", "roll [noise=0.3]", "roll [noise=0.1]", "moons"]


def test_seed_stability_is_zero_for_a_rotated_scaled_copy(tmp_path: Path) -> None:
    # Procrustes removes rotation, reflection and scale (Gower 1975), so a rotated, scaled copy
    # has disparity 0 (scipy.spatial.procrustes); a different point set is not compared.
    rng = np.random.default_rng(0)
    Y = rng.standard_normal((50, 2))
    t = 0.7
    R = np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])
    (tmp_path / "embeddings").mkdir()
    np.save(tmp_path / "embeddings" / "a0.npy", Y)
    np.save(tmp_path / "embeddings" / "a1.npy", 3.0 * Y @ R.T + 5.0)
    np.save(tmp_path / "embeddings" / "b0.npy", Y)
    np.save(tmp_path / "embeddings" / "b1.npy", rng.standard_normal((50, 2)))
    fixed = json.dumps({"name": "helix", "n": 50, "seed": 4})
    jobs = pd.DataFrame(
        {
            "job_id": ["a0", "a1", "b0", "b1"],
            "status": "ok",
            "seed": [0, 1, 0, 1],
            "data": ["helix", "helix", "moons", "moons"],
            "config": "pca",
            "dataset_params": [
                fixed,
                fixed,
                json.dumps({"name": "two_moons", "seed": 0}),
                json.dumps({"name": "two_moons", "seed": 1}),
            ],
            "n_samples": 50,
            "n_features": 3,
        }
    )

    class NoReload:
        def get(self, params: dict, n_cells: float = 0.0) -> None:
            return None

    results = Results(out_dir=tmp_path, jobs=jobs, scores=pd.DataFrame(), runs=pd.DataFrame())
    out = seed_stability(results, NoReload()).set_index("dataset")
    assert out.loc["helix", "disparity"] == pytest.approx(0.0, abs=1e-12)
    assert math.isnan(out.loc["moons", "disparity"]) and out.loc["moons", "note"]


def test_the_report_keeps_the_jobs_of_the_latest_run(tmp_path, write_store):
    # A suite edited and run again into the same folder: the store keeps the earlier jobs,
    # the report reads only those the latest run planned (exact fact of the fixture).
    import sqlite3

    from lowdim.analysis.results import load_results

    folder = write_store(tmp_path / "again", small=True)
    everything = load_results(folder).jobs
    kept = everything[everything["dataset_label"] == everything["dataset_label"].iloc[0]]
    with sqlite3.connect(folder / "store.sqlite") as con:
        con.execute(
            "CREATE TABLE planned (run_id INTEGER, job_id TEXT, dataset_label TEXT, "
            "method_label TEXT, seed INTEGER)"
        )
        rows = [(1, j, "", "", 0) for j in everything["job_id"]]
        rows += [(2, j, "", "", 0) for j in kept["job_id"]]
        con.executemany("INSERT INTO planned VALUES (?, ?, ?, ?, ?)", rows)
    results = load_results(folder)
    assert sorted(results.jobs["job_id"]) == sorted(kept["job_id"])
    assert set(results.scores["job_id"]) <= set(kept["job_id"])
    assert len(kept) < len(everything)


def test_breakdown_curves_need_two_values_along_the_axis(tmp_path, write_store):
    # Two stress axes on one dataset, not crossed (as a suite with one table per axis writes
    # them): a cell holding one axis value has no curve, so it gets no breakdown row.
    import json as _json
    import sqlite3

    from lowdim.analysis.breakdown import breakdown_table
    from lowdim.analysis.results import criteria_in, criterion_table, load_results, summarise

    folder = write_store(tmp_path / "axes")
    with sqlite3.connect(folder / "store.sqlite") as con:
        rows = con.execute("SELECT job_id, dataset_params FROM jobs").fetchall()
        for job_id, params in rows:
            spec = _json.loads(params)
            if spec.get("name") == "swiss_roll":
                spec["density"] = 2.0 if spec.get("noise") == 0.0 else 0.0
                con.execute(
                    "UPDATE jobs SET dataset_params = ? WHERE job_id = ?",
                    (_json.dumps(spec), job_id),
                )
    results = load_results(folder)
    table = criterion_table(results)
    board = breakdown_table(results, table, criteria_in(summarise(table)))
    assert not board.empty
    assert all(len(v) >= 2 for v in board["values"])
