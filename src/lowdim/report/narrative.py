"""Plain-language readings of the numbers: statistics, and where each method helps or fails.

Every function returns plain text (sentences); the HTML layer escapes it.
"""

from __future__ import annotations

import math

import pandas as pd

from lowdim.analysis.results import rank_table, significant_pairs
from lowdim.report.tables import fmt

__all__ = ["statistics_reading", "method_profiles"]


def _p(p: float | None) -> str:
    if p is None:
        return "n/a"
    return "< 0.001" if p < 0.001 else f"= {p:.3f}"


def statistics_reading(key: str, entry: dict, alpha: float = 0.05) -> list[str]:
    """What the Friedman test and the Nemenyi critical difference say about one criterion."""
    n, k = entry["n_datasets"], entry["n_methods"]
    if entry["p_value"] is None:
        return [
            f"{key}: no test is possible with {n} dataset(s) and {k} configuration(s); "
            "at least 2 of each are needed."
        ]
    ranks = entry["mean_ranks"]
    best = min(ranks, key=ranks.get)
    f_text = (
        "infinite (every dataset ranks them in the same order)"
        if entry["iman_davenport_f"] is None and entry["iman_davenport_p"] == 0.0
        else f"{fmt(entry['iman_davenport_f'])} (p {_p(entry['iman_davenport_p'])})"
    )
    out = [
        f"{key}, over {n} datasets and {k} configurations: Friedman chi2 = "
        f"{entry['friedman_chi2']:.2f} (p {_p(entry['p_value'])}), Iman-Davenport F = {f_text}."
    ]
    # Iman & Davenport's F is the less conservative form (Demšar 2006 recommends it).
    p_test = (
        entry["iman_davenport_p"] if entry["iman_davenport_p"] is not None else entry["p_value"]
    )
    if p_test >= alpha:
        out.append(
            f"At the {alpha:g} level the rankings are consistent with chance: no method can be "
            f"called better on {key}, whatever the order of the mean ranks (best: {best}, "
            f"{ranks[best]:.2f})."
        )
        if n < 5:
            out.append(f"With only {n} datasets the test has little power; add datasets.")
        return out
    cd = entry["critical_difference"]
    pairs = significant_pairs(entry)
    out.append(
        f"The rankings differ more than chance would give. Two configurations differ "
        f"significantly (Nemenyi, {alpha:g}) when their mean ranks are more than CD = {cd:.2f} "
        "apart."
    )
    if pairs:
        shown = "; ".join(f"{a} ahead of {b} by {d:.2f}" for a, b, d in pairs[:8])
        more = f" (and {len(pairs) - 8} more pairs)" if len(pairs) > 8 else ""
        out.append(f"Significant pairs: {shown}{more}.")
    else:
        out.append(
            "Yet no single pair is more than CD apart: the overall difference cannot be "
            "pinned on any two configurations with this many datasets."
        )
    if n < 5:
        out.append(f"With only {n} datasets, treat this as a hint and add datasets.")
    return out


def _family_ranks(tuned: pd.DataFrame, selection: str, higher: bool) -> pd.DataFrame:
    return rank_table(tuned, selection, higher)


def method_profiles(
    tuned: pd.DataFrame,
    selection: str,
    higher: bool,
    breakdown: pd.DataFrame,
    failures: pd.DataFrame,
    bandwidth: pd.DataFrame,
    stability: pd.DataFrame,
    family_of: dict[str, str],
    fraction: float,
) -> dict[str, list[str]]:
    """For each method (family): best and worst datasets, breakdown points, failures,
    bandwidth sensitivity and seed stability, in sentences."""
    ranks = _family_ranks(tuned, selection, higher) if not tuned.empty else pd.DataFrame()
    values = tuned[tuned["criterion"] == selection].set_index(["dataset", "method"])["mean"]
    families = sorted(set(family_of.values()))
    out: dict[str, list[str]] = {}
    for fam in families:
        lines: list[str] = []
        if fam in ranks:
            r = ranks[fam].dropna().sort_values()
            k = ranks.shape[1]
            if len(r) and r.min() == r.max():
                lines.append(
                    f"Rank {r.min():g} of {k} on {selection} on every dataset "
                    f"({_names(r.index.tolist())}: {_vals(values, r.index.tolist(), fam)})."
                )
            elif len(r):
                best = r[r == r.min()].index.tolist()
                worst = r[r == r.max()].index.tolist()
                lines.append(
                    f"Best results on {_names(best)} (rank {r.min():g} of {k} on {selection}, "
                    f"{_vals(values, best, fam)})."
                )
                lines.append(
                    f"Weakest on {_names(worst)} (rank {r.max():g} of {k}, "
                    f"{_vals(values, worst, fam)})."
                )
        configs = [c for c, f in family_of.items() if f == fam]
        lines += _breakdown_lines(breakdown, configs, selection, fraction)
        lines += _failure_lines(failures, fam)
        lines += _bandwidth_lines(bandwidth, fam)
        lines += _stability_lines(stability, configs)
        out[fam] = lines or ["No results for this method."]
    return out


def _names(items: list[str]) -> str:
    return ", ".join(items[:3]) + (f" and {len(items) - 3} more" if len(items) > 3 else "")


def _vals(values: pd.Series, datasets: list[str], fam: str) -> str:
    got = [values.get((d, fam), math.nan) for d in datasets[:3]]
    return ", ".join(fmt(v) for v in got)


def _breakdown_lines(breakdown: pd.DataFrame, configs: list[str], key: str, frac: float) -> list:
    part = breakdown[breakdown["method"].isin(configs) & (breakdown["criterion"] == key)]
    lines = []
    for (dataset, axis, held), g in part.groupby(["dataset", "axis", "held"], sort=True):
        where = f"along {axis} on {dataset}" + (f" [{held}]" if held else "")
        undefined = g[g["note"] != ""]
        broken = g[(g["note"] == "") & g["breakdown"].notna()]
        held_up = g[(g["note"] == "") & g["breakdown"].isna()]
        clauses = []
        for value, b in broken.groupby("breakdown", sort=True):
            clauses.append(f"{_names(sorted(b['method']))} at {axis} = {value:g}")
        if clauses:
            lines.append(
                f"Breaks down {where}: " + "; ".join(clauses) + f" ({key} below {frac:.0%} "
                "of the configuration's own best)."
            )
        if not held_up.empty:
            top = max(v[-1] for v in held_up["values"])
            lines.append(
                f"Holds up {where} ({_names(sorted(held_up['method']))}: {key} stays above "
                f"{frac:.0%} of its best up to {axis} = {top:g})."
            )
        if not undefined.empty:
            lines.append(f"No breakdown point {where}: {undefined['note'].iloc[0]}.")
    return lines


def _failure_lines(failures: pd.DataFrame, fam: str) -> list[str]:
    part = failures[failures["family"] == fam]
    if part.empty:
        return []
    counts = part["status"].value_counts()
    summary = ", ".join(f"{n} {s}" for s, n in counts.items())
    messages = part["error"].fillna("").map(lambda t: " ".join(str(t).split())[:200])
    distinct = [m for m in dict.fromkeys(messages) if m][:3]
    where = _names(list(dict.fromkeys(part["dataset"])))
    text = f"Did not finish {len(part)} job(s) ({summary}) on {where}"
    return [text + (": " + " / ".join(f"“{m}”" for m in distinct) if distinct else "") + "."]


def _bandwidth_lines(bandwidth: pd.DataFrame, fam: str) -> list[str]:
    part = bandwidth[(bandwidth["family"] == fam) & bandwidth["score"].notna()]
    lines = []
    for held, g in part.groupby("held", sort=True):
        numeric = g[g["rule"] == ""]
        if numeric.empty:
            continue
        per = numeric.groupby("dataset")["score"]
        spread = (per.max() - per.min()).mean()
        best_sigma = numeric.loc[per.idxmax(), "bandwidth"].value_counts()
        sigma, wins = best_sigma.index[0], int(best_sigma.iloc[0])
        sub = f" [{held}]" if held else ""
        text = (
            f"Bandwidth{sub}: between the worst and the best fixed sigma the score moves by "
            f"{fmt(spread)} on average over {per.ngroups} dataset(s); sigma = {sigma:g} is best "
            f"on {wins} of them"
        )
        best = per.max()
        for rule, r in g[g["rule"] != ""].groupby("rule", sort=True):
            share = (r.set_index("dataset")["score"] / best).dropna()
            if len(share):
                text += f"; rule {rule} reaches {share.mean():.0%} of the best fixed sigma's score"
        lines.append(text + ".")
    return lines


def _stability_lines(stability: pd.DataFrame, configs: list[str]) -> list[str]:
    part = stability[stability["method"].isin(configs) & stability["disparity"].notna()]
    if part.empty:
        return []
    worst = part.loc[part["disparity"].idxmax()]
    return [
        f"Across seeds on the same points, the Procrustes disparity is at most "
        f"{worst['disparity']:.3g} ({worst['method']} on {worst['dataset']}; 0 = identical up "
        "to rotation and scale, 1 = unrelated)."
    ]
