"""The criterion registry: names, directions, needs and refusals."""

import numpy as np
import pytest

from lowdim.errors import InputError
from lowdim.metrics import get_metric, metric_names, register_metric

# The names DESIGN.md fixes for the store and the suites.
CONTRACT_NAMES = [
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
]


def test_every_contract_name_is_registered_with_its_description():
    assert metric_names()[: len(CONTRACT_NAMES)] == CONTRACT_NAMES
    for name in CONTRACT_NAMES:
        metric = get_metric(name)
        assert metric.name == name and metric.source and metric.description
        assert metric.uses_k == (metric.k_max is not None)


def test_directions_and_needs():
    lower = {name for name in CONTRACT_NAMES if not get_metric(name).higher_is_better}
    assert lower == {"stress", "truth_procrustes", "fit_seconds", "peak_mb"}
    assert get_metric("silhouette").needs == "labels"
    assert get_metric("truth_spearman").needs == "truth"
    assert get_metric("trustworthiness").needs is None
    assert get_metric("trustworthiness").k_max(10) == 4  # k < n/2, Venna & Kaski


def test_runner_measured_numbers_refuse_to_be_computed():
    metric = get_metric("fit_seconds")
    assert metric.measured_by_runner
    X = np.random.default_rng(0).normal(size=(10, 2))
    with pytest.raises(InputError, match="measured by the runner"):
        metric.fn(X, X)


def test_unknown_name_suggests_the_closest():
    with pytest.raises(InputError, match="did you mean 'trustworthiness'"):
        get_metric("trustworthyness")


def test_a_taken_name_is_refused():
    with pytest.raises(InputError, match="taken by lowdim.metrics.coranking.qnx"):
        register_metric("qnx", higher_is_better=True, source="s", description="d")(lambda X, Y: 0)
