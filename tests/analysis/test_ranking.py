"""Summaries, ranks, the overall criterion, the tie-break rule and the tuned view, by hand.

Every expected number below is worked out by hand from the tables in this file.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from lowdim.analysis.ranking import (
    gaps_to_best,
    natural_key,
    ordered,
    over_blocks,
    overall_summary,
    positions,
    rank_table,
    summarise,
    tuned_summary,
)
from lowdim.run.settings import OVERALL, SIMPLER_FIRST, criterion_key, parse_criterion

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
    assert s.loc[("D1", "A"), "n"] == 2


def test_ranks_and_mean_ranks_on_the_hand_made_table() -> None:
    summary = summarise(hand_table())
    ranks = rank_table(summary, "trustworthiness@10", True, ["A", "B", "C"])
    np.testing.assert_allclose(ranks.to_numpy(), [[1, 2, 3], [2.5, 2.5, 1], [2, 3, 1]])
    np.testing.assert_allclose(ranks.mean(axis=0)[["A", "B", "C"]], [11 / 6, 5 / 2, 5 / 3])


def test_lower_is_better_reverses_the_ranks() -> None:
    summary = summarise(hand_table("stress"))
    ranks = rank_table(summary, "stress", False, ["A", "B", "C"])
    # D1: C < B < A; D2: A = B (0.5) < C; D3: A < C, B missing last.
    np.testing.assert_allclose(ranks.to_numpy(), [[3, 2, 1], [1.5, 1.5, 3], [1, 3, 2]])


def test_overall_is_the_mean_within_block_rank_over_headline_criteria() -> None:
    # Criterion 2 is stress with the same numbers (lower better), so the ranks of the two
    # criteria are the hand table's and its reverse (above); their mean per block:
    # D1: A (1 + 3) / 2 = 2, B (2 + 2) / 2 = 2, C (3 + 1) / 2 = 2
    # D2: A (2.5 + 1.5) / 2 = 2, B 2, C (1 + 3) / 2 = 2
    # D3: A (2 + 1) / 2 = 1.5, B (3 + 3) / 2 = 3, C (1 + 2) / 2 = 1.5
    summary = pd.concat([summarise(hand_table()), summarise(hand_table("stress"))])
    overall = overall_summary(
        summary,
        ["trustworthiness@10", "stress"],
        {"trustworthiness@10": True, "stress": False},
        ["A", "B", "C"],
        {"A": "A", "B": "B", "C": "C"},
    ).set_index(["dataset", "method"])
    assert overall.loc[("D1", "A"), "mean"] == 2.0 and overall.loc[("D1", "C"), "mean"] == 2.0
    assert overall.loc[("D3", "A"), "mean"] == 1.5 and overall.loc[("D3", "B"), "mean"] == 3.0
    assert set(overall["criterion"]) == {OVERALL} and set(overall["n"]) == {2}


def test_equal_mean_ranks_go_to_the_simpler_method_then_the_label() -> None:
    ranks = pd.Series({"kernel_pca(b=1)": 1.5, "pca": 1.5, "classical_mds": 1.5, "x": 1.0})
    families = {"kernel_pca(b=1)": "kernel_pca", "pca": "pca", "classical_mds": "classical_mds"}
    order = ordered(ranks, families, SIMPLER_FIRST)
    assert order == ["x", "pca", "classical_mds", "kernel_pca(b=1)"]
    assert positions([ranks[m] for m in order]) == ["1", "=2", "=2", "=2"]
    assert positions([1.0, 2.0, 2.0, 4.0]) == ["1", "=2", "=2", "4"]


def test_tuned_view_picks_the_best_configuration_by_the_selection() -> None:
    rows = [
        # dataset, configuration, family, criterion, mean
        ("D1", "k(s=1)", "k", "rnx_auc", 0.3),
        ("D1", "k(s=2)", "k", "rnx_auc", 0.5),
        ("D1", "k(s=1)", "k", "stress", 0.2),
        ("D1", "k(s=2)", "k", "stress", 0.4),
        ("D2", "k(s=1)", "k", "rnx_auc", 0.6),
        ("D2", "k(s=2)", "k", "rnx_auc", 0.6),
        ("D2", "k(s=1)", "k", "stress", 0.1),
        ("D2", "k(s=2)", "k", "stress", 0.3),
        ("D1", "p", "p", "rnx_auc", 0.45),
        ("D1", "p", "p", "stress", 0.3),
    ]
    summary = pd.DataFrame(rows, columns=["dataset", "method", "family", "criterion", "mean"])
    summary = summary.assign(sd=np.nan, n=1)
    tuned = tuned_summary(summary, "rnx_auc", True, SIMPLER_FIRST)
    picks = tuned.drop_duplicates(["dataset", "method"]).set_index(["dataset", "method"])
    assert picks.loc[("D1", "k"), "configuration"] == "k(s=2)"  # 0.5 > 0.3
    assert picks.loc[("D2", "k"), "configuration"] == "k(s=1)"  # tie at 0.6: by label
    got = tuned[
        (tuned["dataset"] == "D1") & (tuned["method"] == "k") & (tuned["criterion"] == "stress")
    ]
    assert got["mean"].iloc[0] == 0.4  # the pick's other criteria come along


def test_gaps_to_best_in_the_criterion_units() -> None:
    gaps = gaps_to_best(summarise(hand_table()), {"trustworthiness@10": True})
    gaps = gaps.set_index(["dataset", "method"])
    assert gaps.loc[("D1", "C"), "gap"] == pytest.approx(0.2)  # 0.9 - 0.7
    assert gaps.loc[("D2", "C"), "gap"] == 0.0 and gaps.loc[("D2", "A"), "best_method"] == "C"


def test_over_blocks_spread_is_across_blocks_or_seeds_for_one() -> None:
    values = over_blocks(summarise(hand_table())).set_index(["method", "criterion"])
    a = values.loc[("A", "trustworthiness@10")]
    assert a["mean"] == pytest.approx((0.9 + 0.5 + 0.3) / 3)
    assert a["spread"] == pytest.approx(np.std([0.9, 0.5, 0.3], ddof=1))
    one = over_blocks(summarise(hand_table()[hand_table()["dataset"] == "D1"]))
    assert one.set_index("method").loc["A", "spread"] == pytest.approx(0.05 * math.sqrt(2))


def test_criterion_keys_and_natural_order() -> None:
    assert criterion_key("trustworthiness", 10) == "trustworthiness@10"
    assert criterion_key("rnx_auc", 0) == "rnx_auc"
    assert parse_criterion("trustworthiness@10") == ("trustworthiness", 10)
    assert sorted(["n=160", "n=40", "n=80"], key=natural_key) == ["n=40", "n=80", "n=160"]
