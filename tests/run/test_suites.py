"""Suites: TOML -> validated Suite -> jobs; every validation error worded."""

from __future__ import annotations

import json
import re

import pytest
from sklearn.base import BaseEstimator, TransformerMixin

import lowdim
import lowdim.run.suites
from lowdim._validation import Interval, Options
from lowdim.errors import InputError
from lowdim.methods import register_method
from lowdim.run.suites import load_suite, ordinal, parse_memory, suite_from_dict

METRICS = ["trustworthiness", "continuity", "knn_accuracy", "rnx_auc", "fit_seconds", "peak_mb"]


@register_method("suite_test_kernel")
class SuiteTestKernel(TransformerMixin, BaseEstimator):
    """A registered method with declared parameter specs, as the built-ins have."""

    _param_specs = {
        "n_neighbors": [Interval(int, 1, "n_samples - 1")],
        "kernel": [Options(("rbf", "linear"))],
    }

    def __init__(self, *, n_components=2, n_neighbors=10, kernel="rbf", random_state=None):
        self.n_components = n_components
        self.n_neighbors = n_neighbors
        self.kernel = kernel
        self.random_state = random_state

    def fit(self, X, y=None):
        return self


@pytest.fixture(autouse=True)
def _known_metrics(monkeypatch):
    # The criterion names are the metrics package's; a fixed list keeps these tests about suites.
    monkeypatch.setattr(lowdim.run.suites, "_metric_names", lambda: list(METRICS))


def base(**suite):
    return {
        "suite": {"name": "t", "seeds": [0, 1], "neighbors": [5, 10], **suite},
        "datasets": [{"name": "swiss_roll", "n": 120}],
        "methods": [{"name": "suite_test_kernel"}],
    }


def message(data, source="suites/x.toml"):
    with pytest.raises(InputError) as info:
        suite_from_dict(data, source=source)
    return str(info.value)


def test_grid_is_the_cartesian_product_within_a_table():
    data = base()
    data["datasets"] = [{"name": "swiss_roll", "grid": {"n": [100, 150], "noise": [0.0, 0.1]}}]
    data["methods"] = [
        {"name": "suite_test_kernel", "grid": {"n_neighbors": [5, 10, 20]}},
        {"import": "sklearn.decomposition:PCA"},
    ]
    suite = suite_from_dict(data, source="x.toml")
    jobs = suite.jobs()
    # 4 dataset points x (3 + 1) method points x 2 seeds
    assert len(jobs) == 4 * 4 * 2
    assert len({j.job_id for j in jobs}) == len(jobs)
    labels = {j.method_label for j in jobs}
    assert labels == {
        "suite_test_kernel(n_neighbors=5)",
        "suite_test_kernel(n_neighbors=10)",
        "suite_test_kernel(n_neighbors=20)",
        "sklearn.PCA",
    }
    assert {j.dataset_label for j in jobs} == {
        "swiss_roll(n=100, noise=0.0)",
        "swiss_roll(n=100, noise=0.1)",
        "swiss_roll(n=150, noise=0.0)",
        "swiss_roll(n=150, noise=0.1)",
    }


def test_default_label_shows_only_non_default_parameters():
    data = base()
    data["methods"] = [{"name": "suite_test_kernel", "kernel": "rbf", "n_neighbors": 7}]
    (job, *_) = suite_from_dict(data).jobs()
    assert job.method_label == "suite_test_kernel(n_neighbors=7)"
    assert job.dataset_label == "swiss_roll(n=120)"


def test_given_label_gets_the_swept_values():
    data = base()
    data["methods"] = [{"name": "suite_test_kernel", "label": "sk", "grid.x": None}]
    del data["methods"][0]["grid.x"]
    data["methods"][0]["grid"] = {"n_neighbors": [3, 4]}
    labels = [j.method_label for j in suite_from_dict(data).jobs()]
    assert sorted(set(labels)) == ["sk(n_neighbors=3)", "sk(n_neighbors=4)"]


def test_seeds_feed_the_dataset_unless_it_fixes_its_own():
    jobs = suite_from_dict(base()).jobs()
    assert [j.dataset_spec["seed"] for j in jobs] == [0, 1]
    assert [j.seed for j in jobs] == [0, 1]
    data = base()
    data["datasets"][0]["seed"] = 42
    jobs = suite_from_dict(data).jobs()
    assert [j.dataset_spec["seed"] for j in jobs] == [42, 42]
    assert [j.seed for j in jobs] == [0, 1]
    assert jobs[0].job_id != jobs[1].job_id


def test_job_ids_are_stable_and_follow_every_setting(monkeypatch):
    first = [j.job_id for j in suite_from_dict(base()).jobs()]
    assert first == [j.job_id for j in suite_from_dict(base()).jobs()]
    assert all(re.fullmatch(r"[0-9a-f]{16}", i) for i in first)
    # a default written out explicitly is the same job (the spec is normalised first)
    data = base()
    data["datasets"][0]["noise"] = 0
    assert [j.job_id for j in suite_from_dict(data).jobs()] == first
    changed = base()
    changed["methods"][0]["n_neighbors"] = 11
    assert not set(first) & {j.job_id for j in suite_from_dict(changed).jobs()}
    assert not set(first) & {j.job_id for j in suite_from_dict(base(n_components=3)).jobs()}
    assert not set(first) & {j.job_id for j in suite_from_dict(base(neighbors=[5])).jobs()}
    monkeypatch.setattr(lowdim.run.suites, "__version__", "99.0")
    assert not set(first) & {j.job_id for j in suite_from_dict(base()).jobs()}


def test_a_changed_file_makes_new_jobs(tmp_path):
    csv = tmp_path / "cells.csv"
    csv.write_text("a,b,c\n1,2,3\n4,5,7\n7,8,8\n1,1,0\n")
    suite_file = tmp_path / "s.toml"
    suite_file.write_text(
        '[suite]\nname = "f"\n[[datasets]]\nfile = "cells.csv"\n'
        '[[methods]]\nimport = "sklearn.decomposition:PCA"\n'
    )
    first = load_suite(suite_file).jobs()
    assert first[0].dataset_spec["file"] == str(csv)  # resolved beside the suite file
    assert first[0].dataset_label == "cells.csv"
    assert load_suite(suite_file).jobs()[0].job_id == first[0].job_id
    csv.write_text("a,b,c\n1,2,3\n4,5,7\n7,8,8\n1,1,1\n")
    assert load_suite(suite_file).jobs()[0].job_id != first[0].job_id


def test_not_toml_gives_line_and_column(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text('[suite]\nname = "x"\nseeds = [0, 1\n[[datasets]]\n')
    with pytest.raises(InputError, match=r"broken.toml: not valid TOML: .*line 4, column 1"):
        load_suite(path)


def test_missing_file():
    with pytest.raises(InputError, match="suite file 'nowhere.toml' not found"):
        load_suite("nowhere.toml")


@pytest.mark.parametrize(
    "change, expected",
    [
        (
            lambda d: d["suite"].update(seed=[1]),
            "suites/x.toml: [suite]: unknown key `seed` (did you mean 'seeds'?)",
        ),
        (
            lambda d: d.update(method=[{}]),
            "suites/x.toml: unknown table [method] (did you mean 'methods'?)",
        ),
        (
            lambda d: d["methods"].extend([{"name": "pca"}, {"name": "suite_test_kernal"}]),
            "suites/x.toml: the 3rd [[methods]]: `name`: unknown method 'suite_test_kernal' "
            "(did you mean 'suite_test_kernel'?)",
        ),
        (
            lambda d: d["methods"][0].update(n_neigbors=3),
            "suites/x.toml: the 1st [[methods]]: unknown parameter `n_neigbors` of "
            "suite_test_kernel (did you mean 'n_neighbors'?)",
        ),
        (
            lambda d: d["methods"][0].update(kernel="rfb"),
            "suites/x.toml: the 1st [[methods]]: the parameter `kernel` of `SuiteTestKernel` "
            "must be one of 'rbf', 'linear', got 'rfb' (did you mean 'rbf'?)",
        ),
        (
            lambda d: d["methods"][0].update(grid={"n_neighbors": [5, 0]}),
            "suites/x.toml: the 1st [[methods]]: the parameter `n_neighbors` of "
            "`SuiteTestKernel` must be an int in [1, n_samples - 1], got 0",
        ),
        (
            lambda d: d["methods"][0].update(grid={"n_neighbors": 5}),
            "suites/x.toml: the 1st [[methods]]: `grid.n_neighbors` must be a non-empty list",
        ),
        (
            lambda d: d["methods"].append({"import": "sklearn.decomposition:PCAA"}),
            "suites/x.toml: the 2nd [[methods]]: `import`: cannot import "
            "'sklearn.decomposition:PCAA': 'sklearn.decomposition' has no attribute 'PCAA' "
            "(did you mean 'PCA'?)",
        ),
        (
            lambda d: d["methods"].append({"name": "pca", "import": "sklearn.decomposition:PCA"}),
            "suites/x.toml: the 2nd [[methods]]: give either `name`",
        ),
        (
            lambda d: d["suite"].update(metrics=["trustworthines"]),
            "suites/x.toml: [suite]: `metrics` names an unknown criterion 'trustworthines' "
            "(did you mean 'trustworthiness'?)",
        ),
        (
            lambda d: d["suite"].update(headline="continuity", metrics=["trustworthiness"]),
            "the `headline` criterion 'continuity' is not among `metrics`",
        ),
        (
            lambda d: d["suite"].update(headline=["trustworthiness@12"]),
            "suites/x.toml: [suite]: the `headline` criterion 'trustworthiness@12' asks for "
            "K = 12, which is not among `neighbors` [5, 10]",
        ),
        (
            lambda d: d["suite"].update(headline=["trustworthiness@ten"]),
            "suites/x.toml: [suite]: the `headline` entry 'trustworthiness@ten' must be a "
            "criterion name or 'name@K'",
        ),
        (
            lambda d: d["suite"].update(headline=[]),
            "suites/x.toml: [suite]: `headline` must be a criterion or a list of criteria",
        ),
        (
            lambda d: d["suite"].update(seeds=[0, -1]),
            "suites/x.toml: [suite]: `seeds` must be a non-empty list of integers >= 0",
        ),
        (
            lambda d: d["suite"].update(memory_limit="4 gigs"),
            'suites/x.toml: [suite]: `memory_limit` must be a size such as "4GB"',
        ),
        (
            lambda d: d["suite"].update(timeout=0),
            "suites/x.toml: [suite]: `timeout` must be a number of seconds > 0",
        ),
        (
            lambda d: d["suite"].update(name="my suite/1"),
            "suites/x.toml: [suite]: `name` must be a short name",
        ),
        (
            lambda d: d["datasets"][0].update(nosie=0.1),
            "suites/x.toml: the 1st [[datasets]]: unknown key `nosie` for dataset 'swiss_roll' "
            "(did you mean 'noise'?)",
        ),
        (
            lambda d: d["datasets"].append({"name": "swiss_rol"}),
            "suites/x.toml: the 2nd [[datasets]]",
        ),
        (
            lambda d: d["datasets"].append({"name": "swiss_roll", "n": 120}),
            "suites/x.toml: the 2nd [[datasets]]: this table repeats 'swiss_roll(n=120)' from "
            "the 1st [[datasets]]",
        ),
        (
            lambda d: d["methods"].append({"name": "pca", "label": "suite_test_kernel"}),
            "suites/x.toml: the 2nd [[methods]]: the display label 'suite_test_kernel' is already "
            "used by the 1st [[methods]]",
        ),
        (lambda d: d.pop("methods"), "suites/x.toml: the suite has no [[methods]] table"),
        (lambda d: d.pop("suite"), "suites/x.toml: the [suite] table is missing"),
        (
            lambda d: d["datasets"][0].update(grid={"name": ["a", "b"]}),
            "`name` cannot be swept",
        ),
    ],
)
def test_validation_errors_name_file_table_key_and_closest(change, expected):
    data = base()
    change(data)
    assert expected in message(data)


def test_the_unknown_dataset_name_is_suggested():
    data = base()
    data["datasets"] = [{"name": "swiss_rol"}]
    text = message(data)
    assert "the 1st [[datasets]]" in text and "'swiss_roll'" in text


def test_memory_sizes():
    assert parse_memory("4GB") == 4 * 2**30
    assert parse_memory("512 MB") == 512 * 2**20
    assert parse_memory("1.5GiB") == int(1.5 * 2**30)
    assert parse_memory(1000) == 1000
    assert parse_memory(None) is None and parse_memory("none") is None
    with pytest.raises(InputError):
        parse_memory("-1GB")


def test_ordinals():
    # common practice (English ordinal suffixes)
    assert [ordinal(i) for i in (1, 2, 3, 4, 11, 12, 13, 21, 22, 101, 111)] == [
        "1st",
        "2nd",
        "3rd",
        "4th",
        "11th",
        "12th",
        "13th",
        "21st",
        "22nd",
        "101st",
        "111th",
    ]


def test_suite_text_and_settings_are_kept(tmp_path):
    path = tmp_path / "s.toml"
    text = (
        '[suite]\nname = "kept"\ntimeout = 5\nmemory_limit = "1GB"\nthreads = 2\n'
        '[[datasets]]\nname = "swiss_roll"\nn = 100\n[[methods]]\nname = "pca"\n'
    )
    path.write_text(text)
    suite = load_suite(path)
    assert suite.text == text
    (job,) = suite.jobs()
    assert (job.timeout, job.memory_limit, job.threads) == (5.0, 2**30, 2)
    assert job.neighbors == (5, 10, 30) and job.metrics is None
    assert job.method_spec == {"name": "pca"}
    json.dumps(job.dataset_spec)  # the spec is plain data, storable as JSON


def test_headline_may_list_criteria_at_their_own_k():
    suite = suite_from_dict(base(headline=["continuity@5", "trustworthiness@10"]), source="x")
    assert suite.headline == ("continuity@5", "trustworthiness@10")
    assert suite.select == "overall" and suite.alpha == 0.05
    assert suite_from_dict(base(), source="x").headline == ()


def test_select_and_alpha_are_checked():
    assert suite_from_dict(base(select="continuity@5"), source="x").select == "continuity@5"
    with pytest.raises(InputError, match="`select` criterion 'continuity@7' asks for K = 7"):
        suite_from_dict(base(select="continuity@7"), source="x")
    with pytest.raises(InputError, match="`alpha` must be a number in"):
        suite_from_dict(base(alpha=0.7), source="x")


def test_the_settings_record_resolves_the_headline_at_one_k():
    # The one K rule: the lower median of `neighbors` (10 for [5, 10, 30], 5 for [5, 10]).
    from lowdim.run.settings import Settings, headline_k, resolve_settings

    assert headline_k([5, 10, 30]) == 10 and headline_k([5, 10]) == 5 and headline_k([7]) == 7
    data = base(metrics=["trustworthiness", "continuity", "rnx_auc"], neighbors=[5, 10, 30])
    settings = resolve_settings(suite_from_dict(data, source="x"))
    assert settings.headline == ("rnx_auc", "trustworthiness@10", "continuity@10")
    assert {c.key for c in settings.criteria} >= {"trustworthiness@5", "fit_seconds"}
    assert settings.directions["fit_seconds"] is False
    assert Settings.from_json(settings.to_json()) == settings
