"""How compare's recommendation words the bandwidth it read the sensitivity along."""

import pandas as pd

from lowdim.report.recommendation import _bandwidth_text, _one_bandwidth_axis


def test_a_fixed_bandwidth_is_worded_as_its_label_words_it():
    label = "diffusion_maps(bandwidth=0.25 × median distance (0.762))"
    assert _bandwidth_text(label, 0.762) == "0.25 × median distance (0.762)"
    assert _bandwidth_text("kernel_pca(bandwidth=median)", "median") == "median"
    assert _bandwidth_text("dm(n_neighbors=5, bandwidth=local, alpha=1)", "local") == "local"
    assert _bandwidth_text("my_method", 3.0) == "3.0"


def test_the_sensitivity_is_read_along_one_axis_with_the_rest_held():
    # compare's standard sweep of diffusion maps: bandwidth rules and multiples of the median
    # distance at the default neighbours, and the median rule at three neighbour counts. Only
    # the first group varies the bandwidth alone.
    specs = {
        "dm(bandwidth=median)": {"bandwidth": "median"},
        "dm(bandwidth=local)": {"bandwidth": "local"},
        "dm(bandwidth=2 × median distance (6.1))": {"bandwidth": 6.1},
        "dm(n_neighbors=5)": {"bandwidth": "median", "n_neighbors": 5},
        "dm(n_neighbors=30)": {"bandwidth": "median", "n_neighbors": 30},
    }
    jobs = pd.DataFrame({"config_spec": list(specs.values())}, index=list(specs))
    assert _one_bandwidth_axis(list(specs), jobs) == [
        "dm(bandwidth=median)",
        "dm(bandwidth=local)",
        "dm(bandwidth=2 × median distance (6.1))",
    ]
