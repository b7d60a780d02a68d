"""The Dataset record and the registry of named datasets."""

import dataclasses

import numpy as np
import pytest

from lowdim.datasets import Dataset, dataset_names
from lowdim.datasets._base import Family, get_family, register
from lowdim.errors import InputError


def test_dataset_is_frozen():
    data = Dataset("toy", np.zeros((3, 2)))
    assert data.n_samples == 3 and data.n_features == 2
    with pytest.raises(dataclasses.FrozenInstanceError):
        data.X = np.ones((3, 2))


def test_names_list_generated_families_then_bundled_sets():
    names = dataset_names()
    assert len(names) == 15 and len(set(names)) == 15
    assert names.index("swiss_roll") < names.index("iris")
    assert {"digits", "iris", "wine", "breast_cancer"} <= set(names)


def test_a_taken_name_is_refused_naming_both():
    impostor = Family("iris", "generated", "fake irises", "a test", "", {}, lambda p: None)
    with pytest.raises(InputError, match="taken by 'iris flower measurements"):
        register(impostor)
    assert get_family("iris").summary.startswith("iris flower")


def test_unknown_name_suggests_the_closest():
    with pytest.raises(InputError, match=r"unknown dataset 'tw_moons' \(did you mean 'two_moons'"):
        get_family("tw_moons", where="here")
