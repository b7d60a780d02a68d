"""Leave-one-out kNN accuracy and the silhouette against scikit-learn."""

import numpy as np
import pytest
from sklearn.metrics import silhouette_score
from sklearn.model_selection import LeaveOneOut, cross_val_score
from sklearn.neighbors import KNeighborsClassifier

from lowdim.errors import InputError
from lowdim.metrics import knn_accuracy, silhouette


def _clusters(n_per=30, gap=20.0, seed=0):
    rng = np.random.default_rng(seed)
    centres = np.array([[0, 0], [gap, 0], [0, gap]])
    Y = np.vstack([c + rng.normal(size=(n_per, 2)) for c in centres])
    labels = np.repeat(["a", "b", "c"], n_per)
    return Y, labels


def test_knn_accuracy_on_separated_and_on_shuffled_labels():
    Y, labels = _clusters()
    # Well separated clusters: every leave-one-out vote is right (exact fact).
    assert knn_accuracy(Y, Y, k=5, labels=labels) == 1.0
    rng = np.random.default_rng(1)
    chance = [knn_accuracy(Y, Y, k=5, labels=rng.permutation(labels)) for _ in range(10)]
    # Shuffled labels: about 1/3 for three equal classes (common practice: chance level).
    assert abs(np.mean(chance) - 1 / 3) < 0.1


@pytest.mark.parametrize("k", [1, 3, 7])
def test_knn_accuracy_equals_scikit_learn_leave_one_out(k):
    rng = np.random.default_rng(k)
    Y = rng.normal(size=(60, 2))
    labels = (Y[:, 0] + 0.8 * rng.normal(size=60) > 0).astype(int)
    # Source: sklearn KNeighborsClassifier under LeaveOneOut (odd k, two classes: no vote ties).
    expected = cross_val_score(KNeighborsClassifier(n_neighbors=k), Y, labels, cv=LeaveOneOut())
    assert knn_accuracy(Y, Y, k=k, labels=labels) == pytest.approx(expected.mean(), abs=1e-12)


@pytest.mark.parametrize("d", [2, 6])
def test_silhouette_equals_scikit_learn(d):
    rng = np.random.default_rng(d)
    Y = rng.normal(size=(90, d))
    labels = rng.integers(0, 3, 90)
    labels[7] = 5  # a class of one point scores 0
    # Source: sklearn.metrics.silhouette_score (Rousseeuw 1987).
    assert silhouette(Y, Y, labels=labels) == pytest.approx(silhouette_score(Y, labels), abs=1e-9)


def test_sampled_silhouette_is_near_the_exact_value():
    Y, labels = _clusters(n_per=100, gap=4.0)
    exact = silhouette(Y, Y, labels=labels)
    estimate = silhouette(Y, Y, labels=labels, exact_threshold=50, sample_size=120)
    assert estimate != exact
    assert abs(estimate - exact) < 0.05


def test_label_mistakes_are_worded():
    Y, labels = _clusters(n_per=5)
    with pytest.raises(InputError, match="needs class labels"):
        knn_accuracy(Y, Y, k=1)
    with pytest.raises(InputError, match="one label per row"):
        silhouette(Y, Y, labels=labels[:-1])
    with pytest.raises(InputError, match="between 2 and"):
        silhouette(Y, Y, labels=np.zeros(len(Y)))
