"""The report's sentences, read off the :class:`Analysis`: the verdict and its strength, what
each test says, and where each method helps and where it fails, with effect sizes.

Every function returns plain text; the HTML layer escapes it. Nothing here ranks or tests:
the numbers come from the engine, and a sentence never claims more than its blocks allow.
"""

from __future__ import annotations

import pandas as pd

from lowdim.analysis.engine import Analysis, CriterionTests
from lowdim.report import format as fmt
from lowdim.report.views import criterion_title
from lowdim.run.settings import OVERALL

__all__ = [
    "blocks_phrase",
    "test_form",
    "verdict",
    "strength",
    "statistics_reading",
    "effect_criterion",
    "method_profiles",
]

_FORMS = {
    "exact": "exact p, from every arrangement of the ranks",
    "monte_carlo": "Monte Carlo p from {draws:,} random arrangements of the ranks",
    "iman_davenport": "Iman-Davenport F approximation",
    "chi_square": "chi-square approximation",
    "none": "every block ties every configuration",
}


def blocks_phrase(an: Analysis, n: int | None = None) -> str:
    """``"4 datasets"`` or ``"5 resamples of the file"``."""
    n = len(an.blocks) if n is None else n
    if an.settings.blocks == "resamples":
        return f"{n} resample{'s' if n != 1 else ''} of the file"
    return f"{n} dataset{'s' if n != 1 else ''}"


def test_form(tests: CriterionTests) -> str:
    """How the Friedman p of ``tests`` was obtained, in words."""
    f = tests.friedman
    if f is None:
        return "not run"
    return _FORMS[f.p_method].format(draws=f.draws or 0)


def _min_wilcoxon_p(n: int) -> float:
    """The smallest two-sided p a Wilcoxon signed-rank test can give with n pairs (exact)."""
    return min(1.0, 2.0 / 2**n) if n > 0 else 1.0


def _units(key: str) -> str:
    return "ranks" if key == OVERALL else ""


def verdict(an: Analysis) -> str:
    """One or two sentences: which configuration ranks first, on what, over what."""
    if an.results.jobs.empty:
        return (
            "No job of the latest run has finished yet, so there is no verdict; run its suite "
            "again into this folder to run them."
        )
    if an.table.empty or an.winner is None:
        return (
            "No configuration finished with scores on any dataset, so there is no verdict; "
            "the jobs that did not finish are listed with their messages in report.html and "
            "by `lowdim status`."
        )
    winner = an.winner
    k = len(an.order)
    on = criterion_title(an.selection)
    if an.selection == OVERALL:
        on = f"the overall rank (the mean of its ranks on {len(an.headline)} headline criteria)"
    tied = [m for m in an.tied_with_winner() if m != winner]
    rank = an.selection_ranks.iloc[0]
    text = (
        f"{winner} ranks first of {k} configurations on {on} over {blocks_phrase(an)} "
        f"(mean rank {fmt.rank(rank)})."
    )
    if tied:
        text += (
            f" It ties with {_names(tied)} and is named first by the tie-break rule "
            "(the simpler method first, then the label)."
        )
    return text


def strength(an: Analysis) -> str:
    """How strong the verdict is: which test, which blocks, and what the pair test says."""
    tests = an.tests.get(an.selection)
    if an.winner is None or tests is None:
        return "Nothing was tested."
    n = tests.n_blocks
    alpha = an.settings.alpha
    if n < 2:
        return (
            f"With {blocks_phrase(an, n)} there is nothing to test: this order is that of a "
            "single block, and another dataset or sample could change it."
        )
    f = tests.friedman
    what = f"Friedman's test with the {blocks_phrase(an, n)} as blocks ({test_form(tests)})"
    if f is None:
        omnibus = f"{what} could not be run."
    elif tests.rejects:
        omnibus = f"{what} finds that the configurations' ranks differ ({fmt.p_value(f.p_value)})."
    else:
        omnibus = (
            f"{what} finds no difference among the configurations beyond chance "
            f"({fmt.p_value(f.p_value)}), so the order is not established."
        )
    runner = an.runner_up
    pair = tests.pair(runner) if runner else None
    if runner is None or pair is None:
        return omnibus
    if _min_wilcoxon_p(pair.n_blocks) >= alpha:
        return (
            f"{omnibus} With {pair.n_blocks} blocks no pairwise test can reach {alpha:g} (the "
            f"smallest two-sided Wilcoxon p is {_min_wilcoxon_p(pair.n_blocks):.3g}), so the "
            f"lead over the runner-up, {runner}, is not established."
        )
    lead = _difference(pair.median_difference, an.selection)
    if pair.p_holm < alpha:
        return (
            f"{omnibus} Against the runner-up, {runner}, the lead is significant (Wilcoxon "
            f"signed-rank over {pair.n_blocks} blocks, Holm-adjusted {fmt.p_value(pair.p_holm)};"
            f" median difference {lead})."
        )
    return (
        f"{omnibus} Against the runner-up, {runner}, the lead is not significant (Wilcoxon "
        f"signed-rank over {pair.n_blocks} blocks, Holm-adjusted {fmt.p_value(pair.p_holm)}; "
        f"median difference {lead})."
    )


def _difference(value: float, key: str) -> str:
    if key == OVERALL:
        return f"{value:.2f} ranks"
    return fmt.number(value)


def _names(items: list[str], limit: int = 3) -> str:
    items = list(items)
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def statistics_reading(an: Analysis, key: str) -> list[str]:
    """What Friedman's test, the Nemenyi critical difference and the pairwise tests say about
    one criterion."""
    tests = an.tests[key]
    n, k = tests.n_blocks, tests.n_configurations
    title = criterion_title(key)
    if tests.friedman is None or n < 2:
        return [
            f"{title}: no test is possible with {blocks_phrase(an, n)} and {k} "
            "configuration(s); at least 2 blocks and 2 configurations are needed."
        ]
    f = tests.friedman
    out = [
        f"{title}, over {blocks_phrase(an, n)} and {k} configurations: Friedman chi2 = "
        f"{f.statistic:.2f}, {fmt.p_value(f.p_value)} ({test_form(tests)})."
    ]
    if not tests.rejects:
        best = tests.mean_ranks.index[0]
        out.append(
            f"At the {tests.alpha:g} level the rankings are consistent with chance: no "
            f"configuration can be called better on {title}, whatever the order of the mean "
            f"ranks (best: {best}, {fmt.rank(tests.mean_ranks.iloc[0])})."
        )
    else:
        out.append(
            f"The rankings differ more than chance would give. The Nemenyi critical difference "
            f"is {tests.critical_difference:.2f} mean ranks; the pairwise Wilcoxon tests below "
            "(Holm-adjusted) compare the winner with each other configuration."
        )
    significant = [p for p in tests.pairs if p.p_holm < tests.alpha]
    if tests.pairs:
        if significant:
            out.append(
                f"{an.winner} is significantly ahead of {_names([p.other for p in significant])}"
                f" (Wilcoxon signed-rank, Holm-adjusted p < {tests.alpha:g})."
            )
        elif _min_wilcoxon_p(n) >= tests.alpha:
            out.append(
                f"With {n} blocks no pairwise test can reach {tests.alpha:g} (smallest possible "
                f"p {_min_wilcoxon_p(n):.3g}); add datasets to tell configurations apart."
            )
        else:
            out.append(f"No configuration is significantly behind {an.winner} on {title}.")
    return out


def effect_criterion(an: Analysis) -> str:
    """The criterion in whose units effects are stated (:attr:`Analysis.effect`)."""
    return an.effect


def method_profiles(an: Analysis) -> dict[str, list[str]]:
    """For each method family: where its best configuration is closest to and furthest from
    the best configuration of the run (gaps in the criterion's units), breakdown points,
    failures, bandwidth sensitivity and seed stability, in sentences."""
    key = effect_criterion(an)
    title = criterion_title(key)
    gaps = an.gaps[an.gaps["criterion"] == key]
    families = sorted({an.family(m) for m in an.order})
    out: dict[str, list[str]] = {}
    for fam in families:
        configs = [m for m in an.order if an.family(m) == fam]
        lines: list[str] = []
        part = gaps[gaps["method"].isin(configs)]
        if not part.empty:
            best_per = part.sort_values("gap").groupby("dataset", sort=True).head(1)
            best_per = best_per.sort_values("gap")
            first = best_per[best_per["gap"] <= 1e-12]
            if len(first):
                lines.append(
                    f"Best of all configurations on {title} on {_names(list(first['dataset']))}"
                    f" ({_value_list(first)})."
                )
            rest = best_per[best_per["gap"] > 1e-12]
            if len(rest):
                worst = rest.iloc[-1]
                lines.append(
                    f"Furthest from the best on {worst['dataset']}: {fmt.number(worst['mean'])}"
                    f" against {fmt.number(worst['best'])} for {worst['best_method']} (a gap of "
                    f"{fmt.number(worst['gap'])})."
                )
                if len(rest) > 1:
                    lines.append(
                        f"Median gap to the best over the {len(best_per)} datasets: "
                        f"{fmt.number(float(best_per['gap'].median()))}."
                    )
        lines += degeneracy_lines(an, configs)
        lines += _breakdown_lines(an, configs, key)
        lines += _failure_lines(an.failures, fam)
        lines += _bandwidth_lines(an.bandwidth, fam)
        lines += _stability_lines(an.stability, configs)
        out[fam] = lines or ["No results for this method."]
    return out


def _value_list(rows: pd.DataFrame) -> str:
    return ", ".join(fmt.number(v) for v in rows["mean"].head(3))


def _breakdown_lines(an: Analysis, configs: list[str], key: str) -> list[str]:
    breakdown = an.breakdown
    part = breakdown[breakdown["method"].isin(configs) & (breakdown["criterion"] == key)]
    frac = an.fraction
    lines = []
    for (dataset, axis, held), g in part.groupby(["dataset", "axis", "held"], sort=True):
        where = f"along {axis} on {dataset}" + (f" [{held}]" if held else "")
        undefined = g[g["note"] != ""]
        broken = g[(g["note"] == "") & g["breakdown"].notna()]
        held_up = g[(g["note"] == "") & g["breakdown"].isna()]
        clauses = [
            f"{_names(sorted(b['method']))} at {axis} = {value:g}"
            for value, b in broken.groupby("breakdown", sort=True)
        ]
        if clauses:
            lines.append(
                f"Breaks down {where}: " + "; ".join(clauses) + f" ({criterion_title(key)} "
                f"below {frac:.0%} of the configuration's own best)."
            )
        if not held_up.empty:
            top = max(v[-1] for v in held_up["values"])
            lines.append(
                f"Holds up {where} ({_names(sorted(held_up['method']))}: stays above "
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
            f"{fmt.number(spread)} on average over {per.ngroups} dataset(s); sigma = {sigma:g} "
            f"is best on {wins} of them"
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


def consistency(an: Analysis) -> str | None:
    """How often each configuration ranks first across the blocks, and the range of the
    winner's lead over the runner-up there (its own interval, in the effect's units)."""
    n = len(an.blocks)
    if an.winner is None or n < 2:
        return None
    share = an.first_share()
    counts = {m: int(round(s * n)) for m, s in share.items() if s > 0}
    what = blocks_phrase(an)
    text = (
        f"{an.winner} ranks first (or ties for first) in {counts.get(an.winner, 0)} of the {what}"
    )
    others = [f"{m} in {c}" for m, c in counts.items() if m != an.winner]
    if others:
        text += f"; {_names(others)}"
    lead = an.lead()
    if len(lead) >= 2 and an.runner_up is not None:
        title = criterion_title(an.effect)
        if bool((lead == 0).all()):
            text += f". It scores the same as {an.runner_up} on {title} in every one of them"
        else:
            text += (
                f". Its lead over {an.runner_up} on {title} ranges from "
                f"{fmt.number(lead.min())} to {fmt.number(lead.max())} across them (median "
                f"{fmt.number(float(lead.median()))})"
            )
    return text + "."


def confirmation_reading(an: Analysis) -> list[str]:
    """What the refit of the leading settings on the whole file says."""
    c = an.confirmation
    if c is None:
        return []
    out = []
    configs = len(c.resample_order)
    if c.held:
        out.append(
            f"Refitted on {c.rows} rows ({c.dataset}), the {configs} leading settings keep the "
            f"order of the resamples: {' > '.join(c.whole_order)}."
        )
    else:
        first = (
            "the winner stays first"
            if c.whole_order[:1] == c.resample_order[:1]
            else f"{c.whole_order[0]} comes first there"
        )
        out.append(
            f"Refitted on {c.rows} rows ({c.dataset}), the order of the {configs} leading "
            f"settings changes ({first}): resamples {' > '.join(c.resample_order)}; whole file "
            f"{' > '.join(c.whole_order)}."
        )
    if c.disparity:
        parts = [f"{m} {d:.3g}" for m, d in c.disparity.items()]
        out.append(
            "Fitted on the first resample's rows and extended to every row with its own "
            "transform, each setting lies at this Procrustes disparity from its whole-file fit "
            f"(0 = the same up to rotation and scale, 1 = unrelated): {'; '.join(parts)}."
        )
    without = [m for m in c.resample_order if m not in c.extendable]
    if without and c.extendable:
        out.append(
            f"The extension is not available for {_names(without)}: "
            "the method has no out-of-sample transform."
        )
    elif without:
        out.append(
            f"No leading setting has an out-of-sample transform ({_names(without)}), so how far "
            "a subsample fit lies from the whole-file fit is not measured."
        )
    if c.failures:
        shown = "; ".join(f"{m} ({s}: {e})" for m, s, e in c.failures[:3])
        out.append(f"{len(c.failures)} confirmation job(s) did not finish: {shown}.")
    return out


def candidates_reading(an: Analysis) -> str | None:
    """The candidate set a comparison ranked, and what it left out and why."""
    context = an.settings.context
    families = context.get("candidates")
    if not families:
        return None
    text = (
        f"Candidates: {len(an.order)} settings of {len(families)} methods "
        f"({', '.join(families)}; the {context.get('sweep', 'standard')} sweep)"
    )
    left = context.get("left_out") or []
    if left:
        text += "; left out: " + "; ".join(f"{name} ({why})" for name, why in left)
    return text + "."


def degeneracy_lines(an: Analysis, configs: list[str]) -> list[str]:
    """One sentence per kind of degeneracy found in ``configs``' embeddings: where, how often,
    and the first finding's own words."""
    found = an.diagnoses[an.diagnoses["method"].isin(configs)]
    lines = []
    for kind, part in found.groupby("kind", sort=True):
        cases = part.drop_duplicates(["method", "dataset"])
        where = _names([f"{r.method} on {r.dataset}" for r in cases.itertuples()], limit=2)
        first = part.iloc[0]
        lines.append(
            f"{kind.replace('_', ' ').capitalize()} in {len(cases)} embedding(s) ({where}): "
            f"{first['explanation']}."
        )
    return lines
