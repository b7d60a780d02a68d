"""A plugin method for lowdim: a Gaussian random projection.

Load it on any command with ``--plugin examples/my_method.py``; it registers itself as
``random_projection`` and is then ranked like the built-ins::

    lowdim methods random_projection --plugin examples/my_method.py
    lowdim compare turbine_readings.csv --drop reading_id --labels regime \
        --plugin examples/my_method.py

References
----------
.. [1] S. Dasgupta and A. Gupta, "An elementary proof of a theorem of Johnson and
   Lindenstrauss", Random Structures & Algorithms 22(1), 60-65, 2003.
   https://doi.org/10.1002/rsa.10073
"""

import numpy as np
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted, validate_data

from lowdim.methods import register_method


@register_method("random_projection")
class RandomProjection(TransformerMixin, BaseEstimator):
    """Project centred data on random Gaussian directions (a cheap baseline).

    Parameters
    ----------
    n_components : int, default=2
        Output dimensions.
    random_state : int, RandomState or None, default=None
        Seed of the random directions.
    """

    _reference = "Dasgupta & Gupta, Random Structures & Algorithms 22, 2003"

    def __init__(self, n_components=2, *, random_state=None):
        self.n_components = n_components
        self.random_state = random_state

    def fit(self, X, y=None):
        X = validate_data(self, X, dtype=np.float64)
        rng = check_random_state(self.random_state)
        self.mean_ = X.mean(axis=0)
        scale = 1.0 / np.sqrt(self.n_components)
        self.components_ = rng.normal(0.0, scale, (X.shape[1], self.n_components))
        self.embedding_ = (X - self.mean_) @ self.components_
        return self

    def transform(self, X):
        check_is_fitted(self)
        X = validate_data(self, X, dtype=np.float64, reset=False)
        return (X - self.mean_) @ self.components_

    def fit_transform(self, X, y=None):
        return self.fit(X).embedding_
