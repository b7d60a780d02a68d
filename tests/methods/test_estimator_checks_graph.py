"""scikit-learn's estimator checks on the graph methods (tiny data, default-like settings)."""

import warnings

from sklearn.utils.estimator_checks import parametrize_with_checks

from lowdim.methods._eigen import SolverFallbackWarning
from lowdim.methods._graphs import DisconnectedGraphWarning
from lowdim.methods.diffusion import DiffusionMaps
from lowdim.methods.laplacian import LaplacianEigenmaps

ESTIMATORS = [
    LaplacianEigenmaps(random_state=0),
    LaplacianEigenmaps(
        graph="mutual_knn",
        n_neighbors=6,
        weights="binary",
        normalization="symmetric",
        on_disconnected="largest",
        random_state=0,
    ),
    DiffusionMaps(random_state=0),
    DiffusionMaps(n_neighbors=8, bandwidth="local", alpha=0.5, diffusion_time=2, random_state=0),
    LaplacianEigenmaps(coordinates="independent", random_state=0),
    DiffusionMaps(n_neighbors=8, coordinates="independent", random_state=0),
]


@parametrize_with_checks(ESTIMATORS)
def test_scikit_learn_estimator_checks(estimator, check):
    # Outside reference: scikit-learn's own contract for transformers.
    with warnings.catch_warnings():
        # odd tiny datasets may split the graph or skip a solver; both only warn
        warnings.simplefilter("ignore", DisconnectedGraphWarning)
        warnings.simplefilter("ignore", SolverFallbackWarning)
        check(estimator)
