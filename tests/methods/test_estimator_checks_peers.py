"""scikit-learn's estimator checks on the scikit-learn peers (tiny data, settings that fit it).

Modified LLE and LTSA share Hessian LLE's adapter code (one class, another ``method``).
"""

import warnings

from sklearn.utils.estimator_checks import parametrize_with_checks
from threadpoolctl import threadpool_limits

from lowdim.methods.peers import (
    HessianLLEEmbedding,
    IsomapEmbedding,
    LLEEmbedding,
    SmacofMDS,
    TSNEEmbedding,
)

ESTIMATORS = [
    IsomapEmbedding(n_neighbors=5),
    LLEEmbedding(n_neighbors=5, random_state=0),
    HessianLLEEmbedding(n_neighbors=6, random_state=0),
    TSNEEmbedding(perplexity=2.0, max_iter=250, random_state=0),
    SmacofMDS(max_iter=50, random_state=0),
]


def expected_failures(estimator) -> dict[str, str]:
    # the transformer checks run only where there is a transform: standard LLE of the four
    if isinstance(estimator, LLEEmbedding):
        return {"check_transformer_n_iter": "max_iter is ARPACK's and has no n_iter_"}
    return {}


@parametrize_with_checks(ESTIMATORS, expected_failed_checks=expected_failures)
def test_scikit_learn_estimator_checks(estimator, check):
    # Outside reference: scikit-learn's own contract for estimators (it exempts its
    # LocallyLinearEmbedding from check_transformer_n_iter by name, as "external solver").
    with threadpool_limits(limits=1), warnings.catch_warnings():
        # tiny blobs split Isomap's graph; scikit-learn joins it and warns
        warnings.simplefilter("ignore", UserWarning)
        check(estimator)
