"""``lowdim compare``'s recommendation: plain sentences read off the :class:`Analysis`.

The winner, the verdict and its strength are the engine's, as in every other output; the
sentences here add what a practitioner choosing a method asks next: how the winner stands
against the runner-up on each headline criterion (beyond the spread or not), whether PCA would
do, whether local and global criteria disagree, whether a bandwidth matters, and what in the
data calls for caution (from the settings record's ``context``).
"""

from __future__ import annotations

import json
import shlex
from pathlib import Path

import numpy as np
import pandas as pd

from lowdim.analysis.engine import Analysis
from lowdim.analysis.ranking import over_blocks
from lowdim.report import format as fmt
from lowdim.report.narrative import (
    candidates_reading,
    confirmation_reading,
    consistency,
    degeneracy_lines,
    strength,
    verdict,
)
from lowdim.report.views import criterion_title

__all__ = ["TOLERANCE", "SENSITIVITY", "recommendation", "embed_command"]

TOLERANCE = 0.01
"""Two values closer than this (criteria in [0, 1]) are called level whatever the spread."""
SENSITIVITY = 0.1
"""A bandwidth sweep whose headline value spans more than this is called sensitive."""


def _values(an: Analysis) -> pd.DataFrame:
    """``(method, criterion) -> mean, spread`` over the blocks, headline criteria only."""
    values = over_blocks(an.summary)
    return values[values["criterion"].isin(an.headline)].set_index(["method", "criterion"])


def _gaps(an: Analysis, values: pd.DataFrame, a: str, b: str) -> dict[str, list]:
    """Headline criteria on which ``a`` is ahead of, level with or behind ``b``: level means
    within the two spreads added, or within :data:`TOLERANCE`, whichever is larger."""
    out: dict[str, list] = {"ahead": [], "level": [], "behind": []}
    for key in an.headline:
        if (a, key) not in values.index or (b, key) not in values.index:
            continue
        va, vb = values.loc[(a, key)], values.loc[(b, key)]
        gap = (va["mean"] - vb["mean"]) * (1 if an.directions[key] else -1)
        spread = np.nansum([va["spread"], vb["spread"]])
        margin = max(TOLERANCE, float(spread))
        side = "ahead" if gap > margin else "behind" if gap < -margin else "level"
        out[side].append((criterion_title(key), float(gap)))
    return out


def _listing(items: list) -> str:
    parts = [f"{name} by {fmt.number(abs(gap))}" for name, gap in items]
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]


def _versus(an: Analysis, values: pd.DataFrame) -> str | None:
    winner, rival = an.winner, an.runner_up
    if rival is None:
        return None
    gaps = _gaps(an, values, winner, rival)
    clauses = []
    if gaps["ahead"]:
        clauses.append(f"leads on {_listing(gaps['ahead'])}, beyond the spread")
    if gaps["level"]:
        names = ", ".join(n for n, _ in gaps["level"])
        clauses.append(f"is level on {names} (within the spread or {TOLERANCE})")
    if gaps["behind"]:
        clauses.append(f"trails on {_listing(gaps['behind'])}")
    if not clauses:
        return None
    return f"Against the runner-up, {rival}, {winner} " + "; ".join(clauses) + "."


def _pca(an: Analysis, values: pd.DataFrame) -> str | None:
    pca = [m for m in an.order if an.family(m) == "pca"]
    if not pca:
        return None
    pca, best = pca[0], an.winner
    if best == pca:
        return "PCA itself ranks first: nothing more complex is needed."
    gaps = _gaps(an, values, pca, best)
    behind = [(name, -gap) for name, gap in gaps["behind"]]
    if not behind:
        return (
            f"PCA is as good as {best} on every headline criterion (within {TOLERANCE} or the "
            "spread): a simpler method will do, and PCA has no bandwidth or neighbour count "
            "to choose."
        )
    worst = max(behind, key=lambda t: t[1])
    if not gaps["ahead"] and not gaps["level"]:
        return (
            f"PCA trails on every headline criterion (most on {worst[0]}, by "
            f"{fmt.number(worst[1])}): a linear projection misses this structure."
        )
    parts = []
    if gaps["ahead"]:
        parts.append(f"better than {best} on {_listing(gaps['ahead'])}")
    if gaps["level"]:
        names = ", ".join(n for n, _ in gaps["level"])
        parts.append(f"as good on {names}" if parts else f"as good as {best} on {names}")
    return (
        f"PCA is {' and '.join(parts)} (a simpler method will do if that is what you need), "
        f"but trails on {_listing(behind)}."
    )


def _disagreement(an: Analysis, values: pd.DataFrame) -> str | None:
    """Local and global headline criteria crowned different configurations."""
    scopes = {c.key: c.scope for c in an.settings.criteria}
    firsts: dict[str, list] = {"local": [], "global": []}
    for key in an.headline:
        scope = scopes.get(key)
        if scope not in firsts:
            continue
        col = values.xs(key, level="criterion")["mean"].dropna()
        if col.empty:
            continue
        firsts[scope].append((key, col.idxmax() if an.directions[key] else col.idxmin(), col))
    if not firsts["local"] or not firsts["global"]:
        return None
    if {w for _, w, _ in firsts["local"]} & {w for _, w, _ in firsts["global"]}:
        return None
    (lk, lw, lcol), (gk, gw, gcol) = firsts["local"][0], firsts["global"][0]
    lo = lcol.rank(ascending=not an.directions[lk])
    go = gcol.rank(ascending=not an.directions[gk]).reindex(lo.index)
    rho = lo.corr(go)
    return (
        f"The criteria disagree: {lw} keeps local neighbourhoods best ({criterion_title(lk)} "
        f"{fmt.number(lcol[lw])}) while {gw} keeps global distances best "
        f"({criterion_title(gk)} {fmt.number(gcol[gw])}); the two orders of the configurations "
        f"correlate at {rho:.2f}. Prefer the first to read clusters and neighbours, the second "
        "to read distances between far-apart points."
    )


def _bandwidths(an: Analysis, values: pd.DataFrame) -> list[str]:
    """One line per family whose bandwidth sweep moves a headline criterion by more than
    :data:`SENSITIVITY`."""
    jobs = an.results.jobs.drop_duplicates("config").set_index("config")
    lines = []
    for family in dict.fromkeys(an.family(m) for m in an.order):
        swept = [
            m
            for m in an.order
            if an.family(m) == family
            and m in jobs.index
            and "bandwidth" in jobs.at[m, "config_spec"]
        ]
        swept = _one_bandwidth_axis(swept, jobs)
        if len(swept) < 2:
            continue
        widest = None
        for key in an.headline:
            col = pd.Series(
                {m: values.loc[(m, key), "mean"] for m in swept if (m, key) in values.index}
            ).dropna()
            if len(col) >= 2 and (widest is None or np.ptp(col) > np.ptp(widest[1])):
                widest = (key, col)
        if widest is None or np.ptp(widest[1]) <= SENSITIVITY:
            continue
        key, col = widest
        higher = an.directions[key]
        best, worst = (col.idxmax(), col.idxmin()) if higher else (col.idxmin(), col.idxmax())

        def bw(m: str) -> str:
            return _bandwidth_text(m, jobs.at[m, "config_spec"]["bandwidth"])

        rules = [
            f"{bw(m)} {fmt.number(col[m])}"
            for m in col.index
            if not _is_number(str(jobs.at[m, "config_spec"]["bandwidth"]))
        ]
        picks = f"; the rules give {', '.join(rules)}" if rules else ""
        lines.append(
            f"{family} is sensitive to the bandwidth: {criterion_title(key)} ranges from "
            f"{fmt.number(col[worst])} (bandwidth={bw(worst)}) to {fmt.number(col[best])} "
            f"(bandwidth={bw(best)}) over the {len(col)} bandwidths tried{picks}; check the "
            "pick before trusting a plot."
        )
    return lines


def _bandwidth_text(label: str, value: object) -> str:
    """The bandwidth as the configuration's label words it ("4 × median distance (76.3)"),
    else its value."""
    start = label.find("bandwidth=")
    if start < 0:
        return str(value)
    start += len("bandwidth=")
    depth = 0
    for end in range(start, len(label)):
        char = label[end]
        if char == "(":
            depth += 1
        elif char in "),":
            if depth == 0:
                return label[start:end]
            if char == ")":
                depth -= 1
    return label[start:]


def _one_bandwidth_axis(configs: list[str], jobs: pd.DataFrame) -> list[str]:
    """The largest group of ``configs`` that differ in their bandwidth alone (the first in
    the order on a tie): a sensitivity read along one axis, other settings held."""
    groups: dict[str, list[str]] = {}
    for m in configs:
        rest = {k: v for k, v in jobs.at[m, "config_spec"].items() if k != "bandwidth"}
        groups.setdefault(json.dumps(rest, sort_keys=True, default=str), []).append(m)
    return max(groups.values(), key=len) if groups else []


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _cautions(an: Analysis, values: pd.DataFrame) -> list[str]:
    context = an.settings.context
    lines = []
    flagged = degeneracy_lines(an, [an.winner]) if an.winner else []
    if flagged:
        lines.append(
            f"Check the winner's picture before using it: {' '.join(flagged)} A high score "
            "does not rule these out."
        )
    duplicates = int(context.get("n_duplicates", 0) or 0)
    if duplicates:
        lines.append(
            f"{duplicates} of {context.get('n_samples')} rows repeat an earlier row; neighbour "
            "graphs and rank criteria treat them as distance-0 neighbours, so consider "
            "removing them."
        )
    split = {int(k): int(c) for k, c in (context.get("components") or {}).items() if int(c) > 1}
    if split:
        parts = ", ".join(f"{c} pieces at n_neighbors={k}" for k, c in sorted(split.items()))
        lines.append(
            f"The neighbour graph is disconnected ({parts}); graph methods then place the "
            "pieces arbitrarily relative to each other, so trust them only within a piece or "
            "use more neighbours."
        )
    lines += _bandwidths(an, values)
    failures = an.failures
    if len(failures):
        shown = "; ".join(
            f"{r.method} ({r.status}: {' '.join(str(r.error or 'no message').split())})"
            for r in failures.head(3).itertuples()
        )
        more = f" and {len(failures) - 3} more" if len(failures) > 3 else ""
        lines.append(
            f"{len(failures)} run{'s' if len(failures) != 1 else ''} did not finish: "
            f"{shown}{more}."
        )
    spreads = values["spread"].dropna() if len(values) else pd.Series(dtype=float)
    if len(spreads) and bool((spreads == 0.0).all()):
        lines.append(
            "No seed or sample changed any score (the methods are deterministic on these rows), "
            "so every spread is 0 and says nothing about chance."
        )
    if context.get("resamples"):
        lines.append(
            f"The blocks are {context['resamples']} random subsamples of "
            f"{context['resample_size']} of the file's {context.get('n_samples')} rows, drawn "
            "without replacement; the "
            "spreads and the tests speak of the variation between them."
        )
    for finding in context.get("findings") or []:
        lines.append(finding)
    missing = context.get("missing") or {}
    if missing:
        by_reason: dict[str, list[str]] = {}
        for name, reason in missing.items():
            by_reason.setdefault(reason, []).append(name)
        parts = [f"{', '.join(names)} ({reason})" for reason, names in by_reason.items()]
        lines.append("Not computed: " + "; ".join(parts) + ".")
    return lines


def recommendation(an: Analysis) -> list[str]:
    """The recommendation, one plain sentence (or short paragraph) per item."""
    if an.winner is None or an.table.empty:
        return [verdict(an)] + _cautions(an, pd.DataFrame(columns=["mean", "spread"]))
    values = _values(an)
    lines = [f"Use {an.winner}. " + verdict(an), strength(an)]
    for sentence in (
        consistency(an),
        _versus(an, values),
        _pca(an, values),
        _disagreement(an, values),
    ):
        if sentence:
            lines.append(sentence)
    lines += confirmation_reading(an)
    lines += _cautions(an, values)
    candidates = candidates_reading(an)
    return lines + ([candidates] if candidates else [])


def embed_command(an: Analysis, out: str | None = None) -> str | None:
    """The ``lowdim embed`` command that embeds the whole file with the winner: the same
    columns, preprocessing, settings and seed (``embed`` fixes ``random_state`` to 0, the
    comparison's seed). None when the winner is not a registered method or there is no file."""
    context = an.settings.context
    if an.winner is None or "path" not in context:
        return None
    spec = an.spec_of(an.winner)
    name = spec.pop("name", None)
    if name is None:
        return None
    options = context.get("options", {})
    parts = ["lowdim", "embed", context["path"], "--method", name]
    for key, value in spec.items():
        if key == "random_state":
            continue
        parts += ["--set", f"{key}={value}"]
    if options.get("labels"):
        parts += ["--labels", options["labels"]]
    for flag, key in (("--features", "features"), ("--drop", "drop"), ("--keep", "keep")):
        for column in options.get(key) or []:
            parts += [flag, column]
    if options.get("scale", "none") != "none":
        parts += ["--scale", options["scale"]]
    if options.get("log1p"):
        parts.append("--log1p")
    if options.get("pca_first") is not None:
        parts += ["--pca-first", str(options["pca_first"])]
    parts += ["--n-components", str(options.get("n_components", 2))]
    stem = Path(context["path"]).stem
    parts += ["--out", out or f"{stem}-{name}.csv"]
    return shlex.join(parts)
