"""Costs the runner records for every job and stores beside the criteria: time and memory.

They are registered so that the store, the leaderboards and ``lowdim metrics`` know their
names and directions; they cannot be computed from X and Y, so their functions refuse.
"""

from __future__ import annotations

from numpy.typing import ArrayLike

from lowdim.errors import InputError
from lowdim.metrics._registry import register_metric

__all__ = ["fit_seconds", "peak_mb"]


def _refuse(name: str, what: str) -> float:
    raise InputError(
        f"`{name}` ({what}) is measured by the runner while the method fits, not computed "
        "from X and Y; read it from the results store"
    )


@register_metric(
    "fit_seconds",
    higher_is_better=False,
    measured_by_runner=True,
    source="recorded by the runner (wall-clock time of fit_transform)",
    description="seconds the method took to fit and embed the data",
)
def fit_seconds(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Wall-clock seconds of ``fit_transform``; recorded by the runner, so this refuses."""
    return _refuse("fit_seconds", "the fitting time")


@register_metric(
    "peak_mb",
    higher_is_better=False,
    measured_by_runner=True,
    source="recorded by the runner (peak resident memory of the job)",
    description="peak memory in megabytes while the method fitted",
)
def peak_mb(
    X: ArrayLike,
    Y: ArrayLike,
    *,
    k: int | None = None,
    labels: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> float:
    """Peak resident memory in MB during the fit; recorded by the runner, so this refuses."""
    return _refuse("peak_mb", "the peak memory")
