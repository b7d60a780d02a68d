"""The settings record: everything the outputs of a run depend on, resolved once at its start.

:func:`resolve_settings` turns a validated suite (and, for ``lowdim compare``, what the
comparison found in the data) into a :class:`Settings`: the ranked criteria with their
direction, scope and source, the headline criteria at their K, the selection that picks the
winner, the level of the tests, the tie-break order and the candidate configurations. The
runner stores it with the run (``runs.settings``, JSON); the analysis engine, the report, the
leaderboards, ``stats.json``, the terminal summary of ``run`` and the recommendation of
``compare`` read it from there, so they agree with each other and need neither the suite file
nor the plugins that provided a method or a criterion.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from typing import Any

from lowdim.errors import InputError

__all__ = [
    "OVERALL",
    "SIMPLER_FIRST",
    "TIE_BREAK",
    "Criterion",
    "Settings",
    "criterion_key",
    "parse_criterion",
    "headline_k",
    "resolve_settings",
]

OVERALL = "overall"
"""The selection that ranks on every headline criterion at once (see :class:`Settings`)."""

SIMPLER_FIRST = ("pca", "classical_mds", "kernel_pca", "laplacian_eigenmaps", "diffusion_maps")
"""Built-in families from the fewest choices to make to the most; others follow by name."""

TIE_BREAK = (
    "equal mean ranks go to the simpler method first (PCA, classical MDS, kernel PCA, "
    "Laplacian eigenmaps, diffusion maps, then others by name), then by label"
)


def criterion_key(metric: str, k: int) -> str:
    """``"trustworthiness@10"`` for a criterion at K, the bare name when k is 0."""
    return f"{metric}@{int(k)}" if int(k) else str(metric)


def parse_criterion(key: str) -> tuple[str, int]:
    """Invert :func:`criterion_key`."""
    metric, _, k = key.partition("@")
    return metric, int(k) if k else 0


def headline_k(neighbors: tuple[int, ...] | list[int]) -> int:
    """The K at which a summary shows a neighbourhood criterion: the lower median of the
    suite's ``neighbors`` (10 for [5, 10, 30], 5 for [5, 10]). The one rule used everywhere."""
    ks = sorted(int(k) for k in neighbors)
    if not ks:
        raise InputError("a suite needs at least one K in `neighbors`")
    return ks[(len(ks) - 1) // 2]


@dataclass(frozen=True)
class Criterion:
    """One ranked criterion: a registered metric at one K (0 when it takes none)."""

    metric: str
    k: int
    higher_is_better: bool
    scope: str
    needs: str | None
    source: str

    @property
    def key(self) -> str:
        return criterion_key(self.metric, self.k)


@dataclass(frozen=True)
class Settings:
    """What every output of a run depends on.

    Attributes
    ----------
    criteria : tuple of Criterion
        Every criterion the run ranks, in the registry's order.
    headline : tuple of str
        Keys of the headline criteria: the columns a summary shows, in order.
    selection : str
        What picks the winner and each method's tuned configuration: :data:`OVERALL` (within
        each block, the mean of a configuration's ranks on the headline criteria it has,
        ranked again) or one criterion key.
    alpha : float
        Level of every test.
    simpler_first : tuple of str
        The families of the candidates in tie-break order (:data:`TIE_BREAK`).
    candidates : tuple of str
        Display labels of the configurations the run compares, in suite order.
    families : dict
        Configuration label -> method family (registry name or import target).
    blocks : str
        What the blocks of the tests are: ``"datasets"`` or ``"resamples"`` (of one file).
    context : dict
        What a comparison found in the data (for its cautions); empty for a suite.
    tie_break : str
        The tie-break rule in words (:data:`TIE_BREAK`), as the outputs state it.
    published, unprinted : tuple
        Published figures to set beside the measured ones (:mod:`lowdim.run.published`), and
        the settings the publication does not print.
    """

    criteria: tuple[Criterion, ...]
    headline: tuple[str, ...]
    selection: str
    alpha: float
    simpler_first: tuple[str, ...]
    candidates: tuple[str, ...]
    families: dict[str, str] = field(default_factory=dict)
    blocks: str = "datasets"
    context: dict[str, Any] = field(default_factory=dict)
    tie_break: str = TIE_BREAK
    published: tuple[dict, ...] = ()
    unprinted: tuple[str, ...] = ()

    def criterion(self, key: str) -> Criterion:
        for c in self.criteria:
            if c.key == key:
                return c
        raise KeyError(key)

    @property
    def directions(self) -> dict[str, bool]:
        """Criterion key -> higher is better."""
        return {c.key: c.higher_is_better for c in self.criteria}

    def to_json(self) -> str:
        return json.dumps(asdict(self), sort_keys=True, default=str)

    @classmethod
    def from_json(cls, text: str) -> Settings:
        data = json.loads(text)
        data["criteria"] = tuple(Criterion(**c) for c in data["criteria"])
        for key in ("headline", "simpler_first", "candidates", "published", "unprinted"):
            data[key] = tuple(data.get(key, ()))
        return cls(**data)


def _headline_key(entry: str, uses_k: dict[str, bool], k_default: int) -> str:
    name, k = parse_criterion(entry)
    if k or not uses_k.get(name, False):
        return criterion_key(name, k)
    return criterion_key(name, k_default)


def simplicity_order(families: list[str]) -> tuple[str, ...]:
    """``families`` in tie-break order: :data:`SIMPLER_FIRST`, then the others by name."""
    known = [f for f in SIMPLER_FIRST if f in families]
    return tuple(known + sorted(set(families) - set(known)))


def resolve_settings(
    suite: Any,
    *,
    context: dict[str, Any] | None = None,
    blocks: str = "datasets",
) -> Settings:
    """The settings record of a validated suite (:class:`lowdim.run.suites.Suite`).

    Criterion facts come from the metric registry now, at the start of the run, and are kept
    in the record so that nothing downstream asks the registry again.
    """
    from lowdim.metrics import default_headline, get_metric, metric_names

    scored = list(suite.metrics) if suite.metrics is not None else metric_names()
    # the runner records its measurements for every job, whatever the suite asks
    scored += [n for n in metric_names() if get_metric(n).measured_by_runner and n not in scored]
    criteria = []
    uses_k: dict[str, bool] = {}
    for name in scored:
        m = get_metric(name)
        uses_k[name] = bool(m.uses_k)
        for k in suite.neighbors if m.uses_k else (0,):
            criteria.append(
                Criterion(
                    metric=name,
                    k=int(k),
                    higher_is_better=bool(m.higher_is_better),
                    scope=str(m.scope),
                    needs=m.needs,
                    source=str(m.source),
                )
            )
    keys = {c.key for c in criteria}
    k_default = headline_k(suite.neighbors)
    if suite.headline:
        headline = [_headline_key(e, uses_k, k_default) for e in suite.headline]
    else:
        headline = [
            _headline_key(name, uses_k, k_default) for name in default_headline() if name in scored
        ]
        headline = headline or [c.key for c in criteria if c.scope != "cost"][:1]
    headline = [h for h in dict.fromkeys(headline) if h in keys]
    selection = suite.select
    if selection != OVERALL:
        selection = _headline_key(selection, uses_k, k_default)
        if selection not in keys:
            raise InputError(
                f"{suite.source}: [suite]: `select` = {suite.select!r} is not a criterion this "
                f"suite scores; use {OVERALL!r} or one of {', '.join(sorted(keys))}"
            )
    families = {e.label: str(e.spec.get("name") or e.spec.get("import")) for e in suite.methods}
    return Settings(
        criteria=tuple(criteria),
        headline=tuple(headline),
        selection=selection,
        alpha=float(suite.alpha),
        simpler_first=simplicity_order(list(families.values())),
        candidates=tuple(families),
        families=families,
        blocks=blocks,
        context=dict(context or {}),
        published=tuple(suite.published),
        unprinted=tuple(suite.unprinted),
    )
