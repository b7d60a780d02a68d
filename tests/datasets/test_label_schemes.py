"""Label schemes over intrinsic coordinates: checkerboard and bands."""

import numpy as np
import pytest
from numpy.testing import assert_array_equal

from lowdim.datasets.labels import SCHEME, make_labels, parse_scheme, scheme_problem


def test_parse_scheme():
    assert parse_scheme("checker:5x3") == ("checker", (5, 3))
    assert parse_scheme("Bands:4") == ("bands", (4,))
    assert parse_scheme("none") == ("none", ())


@pytest.mark.parametrize("text", ["checker:0x3", "bands:", "checker:5", "stripes:3", "bands:-1"])
def test_bad_schemes_are_refused(text):
    assert not SCHEME.accepts(text, {})


def test_checkerboard_colours_like_a_chessboard():
    # Cell centres of a 4 x 3 grid: neighbouring cells differ, diagonal ones agree.
    cols, rows = np.meshgrid((np.arange(4) + 0.5) / 4, (np.arange(3) + 0.5) / 3, indexing="ij")
    unit = np.column_stack([cols.ravel(), rows.ravel()])
    labels = make_labels("checker:4x3", unit, None).reshape(4, 3)
    assert_array_equal(labels, np.add.outer(np.arange(4), np.arange(3)) % 2)
    assert set(labels.ravel()) == {0, 1}


def test_bands_cut_the_first_coordinate_into_equal_parts():
    unit = np.column_stack([np.linspace(0, 1, 101), np.zeros(101)])
    labels = make_labels("bands:4", unit, None)
    assert labels[0] == 0 and labels[-1] == 3  # 1.0 belongs to the last band, not a fifth
    assert_array_equal(labels[[24, 25, 49, 50, 74, 75]], [0, 1, 1, 2, 2, 3])


def test_classes_and_none():
    classes = np.array([1, 0, 1])
    assert_array_equal(make_labels("classes", None, classes), classes)
    assert make_labels("none", np.zeros((3, 2)), classes) is None


def test_problems_are_named():
    assert "two intrinsic" in scheme_problem("checker:2x2", intrinsic_dim=1, has_classes=False)
    assert "no natural classes" in scheme_problem("classes", intrinsic_dim=2, has_classes=False)
    assert scheme_problem("bands:3", intrinsic_dim=1, has_classes=False) is None
