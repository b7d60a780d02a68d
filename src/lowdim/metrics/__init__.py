"""Quality criteria of embeddings and their registry.

Each criterion is ``fn(X, Y, *, k=None, labels=None, truth=None) -> float``, registered with
its direction, the data it needs and its source (:func:`get_metric`, :func:`metric_names`).
:func:`score_embedding` computes many at once from one shared neighbour computation. The
formulas, their sources and check values are in ``shared/REFERENCES.md``.
"""

from lowdim.metrics._batch import Scores, score_embedding
from lowdim.metrics._registry import (
    Metric,
    default_headline,
    get_metric,
    metric_names,
    register_metric,
)
from lowdim.metrics.coranking import lcmc, qnx, rnx, rnx_auc
from lowdim.metrics.degeneracy import Degeneracy, find_degeneracies
from lowdim.metrics.distances import StressParts, distance_spearman, stress, stress_parts
from lowdim.metrics.labels import knn_accuracy, silhouette
from lowdim.metrics.neighbourhood import continuity, knn_recall, trustworthiness
from lowdim.metrics.per_point import PointScores, per_point_quality
from lowdim.metrics.recorded import fit_seconds, peak_mb
from lowdim.metrics.truth import truth_procrustes, truth_spearman

__all__ = [
    "Degeneracy",
    "find_degeneracies",
    "Metric",
    "PointScores",
    "Scores",
    "StressParts",
    "default_headline",
    "get_metric",
    "metric_names",
    "register_metric",
    "score_embedding",
    "per_point_quality",
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
    "stress_parts",
    "truth_spearman",
    "truth_procrustes",
    "fit_seconds",
    "peak_mb",
]
