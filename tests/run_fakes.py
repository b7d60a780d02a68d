"""Stand-ins shared by the runner's in-process tests (not collected: no ``test_`` prefix).

``FakeScores`` mimics ``lowdim.metrics.score_embedding``'s result with one criterion computed
by scikit-learn, so the runner's tests do not depend on the metrics package's internals.
Plugin methods that fail in chosen ways are written to files, as a user's plugin would be.
"""

from __future__ import annotations

import sys
import types
from dataclasses import dataclass, field
from pathlib import Path

METRIC_NAMES = ["trustworthiness", "continuity", "knn_accuracy", "fit_seconds", "peak_mb"]


@dataclass
class FakeScores:
    values: list
    notes: list = field(default_factory=list)
    sample_size: int | None = None


def fake_score_embedding(
    X, Y, *, metrics=None, ks=(5,), labels=None, truth=None, random_state=0, per_point_k=None
):
    from sklearn.manifold import trustworthiness

    values = [("trustworthiness", k, float(trustworthiness(X, Y, n_neighbors=k))) for k in ks]
    return FakeScores(values, ["continuity skipped: fake scorer"])


def install_fake_metrics(monkeypatch) -> None:
    """Put a fake ``lowdim.metrics`` in place and make job children inherit it (fork)."""
    import lowdim
    import lowdim.metrics as real
    import lowdim.run.limits

    module = types.ModuleType("lowdim.metrics")
    module.metric_names = lambda: list(METRIC_NAMES)
    module.score_embedding = fake_score_embedding
    module.find_degeneracies = lambda Y, **kwargs: []
    # the criteria's facts (direction, K, scope) are the registry's, for the settings record
    module.get_metric = real.get_metric
    module.default_headline = real.default_headline
    monkeypatch.setitem(sys.modules, "lowdim.metrics", module)
    monkeypatch.setattr(lowdim, "metrics", module, raising=False)
    monkeypatch.setattr(lowdim.run.limits, "START_METHOD", "fork")


PLUGIN = '''
import time

import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin

from lowdim.methods import register_method


@register_method("{prefix}_raises")
class Raises(TransformerMixin, BaseEstimator):
    def __init__(self, *, n_components=2):
        self.n_components = n_components

    def fit(self, X, y=None):
        raise ArithmeticError("the spectrum of the test matrix is empty")


@register_method("{prefix}_sleeps")
class Sleeps(TransformerMixin, BaseEstimator):
    def __init__(self, *, n_components=2):
        self.n_components = n_components

    def fit(self, X, y=None):
        while True:
            time.sleep(1)


@register_method("{prefix}_first_columns")
class FirstColumns(TransformerMixin, BaseEstimator):
    """Keeps the first columns: an exact, seed-free embedding."""

    def __init__(self, *, n_components=2, random_state=None):
        self.n_components = n_components
        self.random_state = random_state

    def fit(self, X, y=None):
        return self

    def transform(self, X):
        return np.asarray(X)[:, : self.n_components] * 1.0
'''


def write_plugin(folder: Path, prefix: str) -> Path:
    """Write a plugin file registering ``<prefix>_raises``, ``_sleeps``, ``_first_columns``."""
    path = folder / f"{prefix}_plugin.py"
    path.write_text(PLUGIN.format(prefix=prefix))
    return path
