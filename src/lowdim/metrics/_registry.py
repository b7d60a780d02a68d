"""The criterion registry: each quality criterion is a :class:`Metric`, found by its name."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from lowdim.errors import InputError, suggestion

__all__ = ["Metric", "SCOPES", "register_metric", "get_metric", "metric_names", "default_headline"]

NEEDS = (None, "labels", "truth")
# What a criterion looks at: neighbourhoods, distances between far points, the user's classes,
# the generator's intrinsic coordinates, or the cost of the fit.
SCOPES = ("local", "global", "labels", "truth", "cost")


@dataclass(frozen=True)
class Metric:
    """A registered quality criterion.

    Attributes
    ----------
    name : str
        The name used in suites, the store and on the command line.
    fn : callable
        ``fn(X, Y, *, k=None, labels=None, truth=None) -> float``.
    higher_is_better : bool
        The direction in which the criterion improves.
    needs : {None, "labels", "truth"}
        Data beyond X and Y that the criterion needs.
    uses_k : bool
        Whether the criterion takes a neighbourhood size K.
    source : str
        The publication the formula comes from.
    description : str
        One sentence saying what the number measures.
    k_rule : str
        The valid range of K in words (empty when ``uses_k`` is False).
    k_max : callable or None
        ``k_max(n)`` is the largest valid K for ``n`` samples.
    measured_by_runner : bool
        True for numbers the runner records (time, memory) rather than computes from X and Y.
    scope : {"local", "global", "labels", "truth", "cost"}
        What the criterion looks at; the recommendation contrasts local and global winners.
    headline : int or None
        Position among the default headline criteria (1 first), None when it is not one.
        A suite that names no ``headline`` shows the defaults it scores, in this order.
    """

    name: str
    fn: Callable[..., float]
    higher_is_better: bool
    needs: str | None
    uses_k: bool
    source: str
    description: str
    k_rule: str = ""
    k_max: Callable[[int], int] | None = None
    measured_by_runner: bool = False
    scope: str = "local"
    headline: int | None = None


_METRICS: dict[str, Metric] = {}
# Built-ins are listed in this order whatever order their modules are imported in.
_BUILT_IN_ORDER = (
    "trustworthiness",
    "continuity",
    "qnx",
    "rnx",
    "rnx_auc",
    "lcmc",
    "knn_recall",
    "knn_accuracy",
    "silhouette",
    "distance_spearman",
    "stress",
    "truth_spearman",
    "truth_procrustes",
    "fit_seconds",
    "peak_mb",
)


def register_metric(
    name: str,
    *,
    higher_is_better: bool,
    source: str,
    description: str,
    needs: str | None = None,
    uses_k: bool = False,
    k_rule: str = "",
    k_max: Callable[[int], int] | None = None,
    measured_by_runner: bool = False,
    scope: str | None = None,
    headline: int | None = None,
) -> Callable[[Callable[..., float]], Callable[..., float]]:
    """Decorator registering ``fn(X, Y, *, k=None, labels=None, truth=None) -> float``.

    Registering a name that is taken by another function is refused with a message naming
    both. ``scope`` defaults to ``"labels"`` or ``"truth"`` for criteria that need them,
    ``"cost"`` for criteria the runner measures, and ``"local"`` otherwise.
    """
    if needs not in NEEDS:
        raise ValueError(f"`needs` must be one of {NEEDS}, got {needs!r}")
    if scope is None:
        scope = "cost" if measured_by_runner else needs or "local"
    if scope not in SCOPES:
        raise ValueError(f"`scope` must be one of {SCOPES}, got {scope!r}")

    def decorate(fn: Callable[..., float]) -> Callable[..., float]:
        taken = _METRICS.get(name)
        if taken is not None and taken.fn is not fn:
            raise InputError(
                f"cannot register {fn.__module__}.{fn.__qualname__} as criterion {name!r}: "
                f"the name is taken by {taken.fn.__module__}.{taken.fn.__qualname__}; "
                "choose another name"
            )
        _METRICS[name] = Metric(
            name=name,
            fn=fn,
            higher_is_better=higher_is_better,
            needs=needs,
            uses_k=uses_k,
            source=source,
            description=description,
            k_rule=k_rule,
            k_max=k_max,
            measured_by_runner=measured_by_runner,
            scope=scope,
            headline=headline,
        )
        return fn

    return decorate


def get_metric(name: str) -> Metric:
    """Return the registered criterion called ``name``."""
    try:
        return _METRICS[name]
    except KeyError:
        raise InputError(
            f"unknown quality criterion {name!r}{suggestion(name, _METRICS)}; "
            "`lowdim metrics` lists them"
        ) from None


def metric_names() -> list[str]:
    """Names of the registered criteria: the built-ins first, then others as registered."""
    first = [name for name in _BUILT_IN_ORDER if name in _METRICS]
    return first + [name for name in _METRICS if name not in _BUILT_IN_ORDER]


def default_headline() -> list[str]:
    """Names of the default headline criteria, in their ``headline`` order."""
    chosen = [m for m in _METRICS.values() if m.headline is not None]
    return [m.name for m in sorted(chosen, key=lambda m: (m.headline, m.name))]
