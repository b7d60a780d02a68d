"""The criterion registry: each quality criterion is a :class:`Metric`, found by its name."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from lowdim.errors import InputError, suggestion

__all__ = ["Metric", "register_metric", "get_metric", "metric_names"]

NEEDS = (None, "labels", "truth")


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
) -> Callable[[Callable[..., float]], Callable[..., float]]:
    """Decorator registering ``fn(X, Y, *, k=None, labels=None, truth=None) -> float``.

    Registering a name that is taken by another function is refused with a message naming
    both.
    """
    if needs not in NEEDS:
        raise ValueError(f"`needs` must be one of {NEEDS}, got {needs!r}")

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
