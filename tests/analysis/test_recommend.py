"""The recommendation's logic on hand-made score tables.

These are logic tests: every expected number and sentence below was worked out by hand from
the tables in this file, and the statistics from Demšar (2006)'s formulas (REFERENCES.md).
"""

import math

import pandas as pd
import pytest

from lowdim.analysis.recommend import (
    Criterion,
    DataFacts,
    format_table,
    parse_label,
    rank_matrix,
    recommend,
    summarise,
)

TRUST = Criterion("trustworthiness", 10, True, "local")
SPEARMAN = Criterion("distance_spearman", 0, True, "global")
STRESS = Criterion("stress", 0, False, "global")
CRITS = [TRUST, SPEARMAN, STRESS]

LE = "laplacian_eigenmaps(n_neighbors=10)"
DM = "diffusion_maps(bandwidth=median)"
DM2 = "diffusion_maps(bandwidth=2.0)"


def table(values: dict, datasets=("bench",), seeds=(0, 1)) -> pd.DataFrame:
    """Long-form scores; ``values[method]`` is (trust, spearman, stress) or, per seed, a list."""
    rows = []
    for dataset in datasets:
        for method, triple in values.items():
            for i, seed in enumerate(seeds):
                t, d, s = triple[i] if isinstance(triple, list) else triple
                for crit, v in zip(CRITS, (t, d, s), strict=True):
                    rows.append(
                        dict(
                            dataset=dataset,
                            method=method,
                            seed=seed,
                            metric=crit.metric,
                            k=crit.k,
                            value=v,
                        )
                    )
    return pd.DataFrame(rows)


CLEAR = {
    LE: (0.95, 0.90, 0.10),
    "pca": (0.80, 0.70, 0.30),
    DM: (0.85, 0.80, 0.20),
    DM2: (0.60, 0.50, 0.45),
}


def test_parse_label():
    assert parse_label("kernel_pca(bandwidth=median, kernel=rbf)") == (
        "kernel_pca",
        {"bandwidth": "median", "kernel": "rbf"},
    )
    assert parse_label("pca") == ("pca", {})


def test_ranks_and_summary_by_hand():
    scores = table(CLEAR)
    ranks = rank_matrix(scores, CRITS)
    # By hand: LE is best on all three criteria, then DM, pca, DM2 (stress: lower is better).
    assert ranks.loc[("bench", "stress")].to_dict() == {DM2: 4.0, DM: 2.0, LE: 1.0, "pca": 3.0}
    summary = summarise(scores, CRITS)
    assert list(summary.index) == [LE, DM, "pca", DM2]
    assert summary["mean_rank"].tolist() == [1.0, 2.0, 3.0, 4.0]
    assert summary.loc[LE, "family"] == "laplacian_eigenmaps"


def test_a_failed_method_takes_the_worst_rank():
    scores = table(CLEAR)
    scores = scores[~((scores["method"] == LE) & (scores["metric"] == "stress"))]
    ranks = rank_matrix(scores, CRITS)
    assert ranks.loc[("bench", "stress"), LE] == 4.0
    assert ranks.loc[("bench", "stress"), DM2] == 3.0


def test_spread_is_the_sample_sd_over_seeds():
    scores = table({"pca": [(0.80, 0.7, 0.3), (0.84, 0.7, 0.3)], LE: (0.9, 0.8, 0.2)})
    summary = summarise(scores, CRITS)
    # sd of {0.80, 0.84} with ddof = 1 is 0.04 / sqrt(2).
    assert summary.loc["pca", "trustworthiness@10 sd"] == pytest.approx(0.04 / math.sqrt(2))
    text = format_table(summary, CRITS)
    assert "0.820 ± 0.028" in text
    assert "stress (lower better)" in text.splitlines()[0]


def test_clear_winner_wording():
    lines = recommend(table(CLEAR), CRITS)
    assert lines[0] == (
        f"Use {LE}: it has the best mean rank (1.00 among 4 settings) over "
        "trustworthiness@10, distance_spearman, stress."
    )
    assert lines[1] == (
        f"Against the best other method, {DM}, it leads on trustworthiness@10 by 0.100, "
        "distance_spearman by 0.100 and stress by 0.100, beyond the seed spread."
    )
    # Three family leaders ranked 1, 2, 3 in 3 blocks: chi2_F = 12*3/(3*4) * (14 - 12) = 6,
    # p = exp(-3) = 0.0498 (chi-square, 2 df); CD = 2.343 * sqrt(3*4 / (6*3)) = 1.91 with
    # Demšar's q_0.05 for k = 3; the rank gap of 1 is within it.
    assert lines[2] == (
        "Among the best setting of each of 3 methods over 3 (dataset, criterion) blocks, it is "
        f"1.00 mean ranks ahead of {DM}, within the Nemenyi critical difference of 1.91 "
        "(alpha 0.05): the lead is not significant, so either will do."
    )
    assert lines[3] == (
        "PCA trails on every criterion (most on distance_spearman, by 0.200): a linear "
        "projection misses this structure, so a simpler method will not do."
    )
    # DM's two bandwidths span 0.25 on trustworthiness, 0.30 on distance_spearman and 0.25
    # on stress: the widest, distance_spearman, is named, with the median rule's value.
    assert lines[4] == (
        "diffusion_maps is sensitive to the bandwidth: distance_spearman ranges from 0.500 "
        "(bandwidth=2.0) to 0.800 (bandwidth=median) over the 2 bandwidths tried; the rules "
        "give median 0.800; check the pick before trusting a plot."
    )
    # Every sd is 0 in this table, so the seeds are said to have changed nothing.
    assert lines[5] == (
        "No seed changed any score (the methods are deterministic on these rows), so the "
        "spread is 0 and only the critical difference speaks to chance."
    )
    assert len(lines) == 6  # the local and the global criteria agree: no disagreement line


def test_a_tie_goes_to_the_simpler_method():
    # Classical MDS on Euclidean data equals PCA (Torgerson 1952; REFERENCES.md): same scores.
    values = {"classical_mds": (0.9, 0.8, 0.2), "pca": (0.9, 0.8, 0.2), LE: (0.8, 0.7, 0.3)}
    lines = recommend(table(values), CRITS)
    assert lines[0].startswith("Use pca: it has the best mean rank (1.50 among 3 settings)")
    # Ranks per block: pca and classical MDS tie at 1.5, LE is 3; CD = 2.343 * sqrt(12 / 18).
    assert lines[2] == (
        "Among the best setting of each of 3 methods over 3 (dataset, criterion) blocks, it "
        "has the same mean rank as classical_mds (the Nemenyi critical difference is 1.91): "
        "either will do."
    )


def test_significant_lead_over_many_blocks():
    scores = table(CLEAR, datasets=("a", "b", "c", "d"))
    lines = recommend(scores, CRITS)
    # 12 blocks, ranks 1, 2, 3 in each: CD = 2.343 * sqrt(12 / 72) = 0.957 < 1.
    assert lines[2] == (
        "Among the best setting of each of 3 methods over 12 (dataset, criterion) blocks, it "
        f"is 1.00 mean ranks ahead of {DM}, more than the Nemenyi critical difference of "
        "0.96 (alpha 0.05): the lead is significant."
    )


def test_pca_as_good_and_seed_spread():
    values = {
        LE: [(0.905, 0.80, 0.20), (0.925, 0.80, 0.20)],
        "pca": (0.91, 0.805, 0.199),
    }
    lines = recommend(table(values), CRITS)
    # LE's trust mean 0.915 > pca's 0.91, but LE ranks first on trust only; pca wins the
    # other two, so pca ranks first overall (mean ranks 1.33 against 1.67).
    assert lines[0].startswith("Use pca: it has the best mean rank (1.33 among 2 settings)")
    assert lines[1] == (
        f"Against the best other method, {LE}, it is level on trustworthiness@10, "
        "distance_spearman, stress (within the seed spread or 0.01)."
    )
    assert "PCA itself ranks first: nothing more complex is needed." in lines


def test_pca_as_good_when_another_method_ranks_first():
    values = {LE: (0.915, 0.81, 0.19), "pca": (0.91, 0.805, 0.195)}
    lines = recommend(table(values), CRITS)
    assert lines[0].startswith(f"Use {LE}:")
    assert (
        f"PCA is as good as {LE} on every criterion (within 0.01 or the seed spread): a "
        "simpler method will do, so prefer PCA, which has no bandwidth or neighbour count to "
        "choose."
    ) in lines


def test_local_and_global_criteria_disagree():
    values = {
        "pca": (0.80, 0.90, 0.10),
        LE: [(0.95, 0.60, 0.40), (0.97, 0.60, 0.40)],
        "kernel_pca(bandwidth=median)": (0.85, 0.85, 0.15),
    }
    lines = recommend(table(values), CRITS)
    sentence = next(s for s in lines if s.startswith("The criteria disagree"))
    # Trust orders the settings LE, kpca, pca (ranks 1, 2, 3 for LE, kpca, pca); distance
    # Spearman orders them pca, kpca, LE (3, 2, 1): the two rank vectors correlate at -1.
    assert sentence == (
        f"The criteria disagree: {LE} keeps local neighbourhoods best (trustworthiness@10 "
        "0.960) while pca keeps global distances best (distance_spearman 0.900); the two "
        "orders of the settings correlate at -1.00. Prefer the first to read clusters and "
        "neighbours, the second to read distances between far-apart points."
    )
    # PCA ranks first (1.67 against 2.00 and 2.33), and trails LE's trust (0.96 against 0.80).
    assert lines[0].startswith("Use pca")
    assert lines[1] == (
        "Against the best other method, kernel_pca(bandwidth=median), it leads on "
        "distance_spearman by 0.050 and stress by 0.050, beyond the seed spread; trails on "
        "trustworthiness@10 by 0.050."
    )


def test_cautions_and_missing_criteria():
    facts = DataFacts(
        n_samples=5000,
        n_duplicates=3,
        components={5: 2, 10: 1, 30: 1},
        subsample=3000,
        failures=[(DM2, "failed", "the kernel matrix is not positive semi-definite")],
        missing={
            "knn_accuracy": "needs labels: pass --labels COLUMN",
            "silhouette": "needs labels: pass --labels COLUMN",
            "truth_spearman": "needs ground-truth coordinates, which a data file lacks",
        },
    )
    lines = recommend(table(CLEAR), CRITS, facts)
    assert (
        "3 of 5000 rows repeat an earlier row; neighbour graphs and rank criteria treat them "
        "as distance-0 neighbours, so consider removing them."
    ) in lines
    assert any(
        s.startswith("The neighbour graph is disconnected (2 pieces at n_neighbors=5);")
        for s in lines
    )
    assert (
        f"1 run did not finish: {DM2} (failed: the kernel matrix is not positive semi-definite)."
    ) in lines
    assert (
        "The file has 5000 rows; each run used a random subsample of 3000, and the spread "
        "includes the change of subsample."
    ) in lines
    assert lines[-1] == (
        "Not computed: knn_accuracy, silhouette (needs labels: pass --labels COLUMN); "
        "truth_spearman (needs ground-truth coordinates, which a data file lacks)."
    )


def test_nothing_finished():
    empty = pd.DataFrame(columns=["dataset", "method", "seed", "metric", "k", "value"])
    facts = DataFacts(failures=[("pca", "timeout", "ran past 1 s")])
    lines = recommend(empty, CRITS, facts)
    assert lines == [
        "No run finished with scores, so there is nothing to recommend.",
        "1 run did not finish: pca (timeout: ran past 1 s).",
    ]


def test_pca_better_on_some_criteria_level_on_others_and_behind_on_the_rest():
    values = {LE: (0.95, 0.80, 0.20), "pca": (0.80, 0.90, 0.205), DM: (0.90, 0.85, 0.25)}
    lines = recommend(table(values), CRITS)
    # Mean ranks by hand: LE (1 + 3 + 1) / 3 = 1.67, pca 2.00, DM 2.33. Against LE, pca is
    # 0.10 ahead on distance_spearman, 0.005 behind on stress (within 0.01: level) and 0.15
    # behind on trustworthiness.
    assert lines[0].startswith(f"Use {LE}: it has the best mean rank (1.67 among 3 settings)")
    assert (
        f"PCA is better than {LE} on distance_spearman by 0.100 and as good on stress (a "
        "simpler method will do if that is what you need), but trails on trustworthiness@10 "
        "by 0.150."
    ) in lines
