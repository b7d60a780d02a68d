"""The peers: scikit-learn's manifold learners and UMAP behind lowdim's registry.

The outside reference throughout is the implementation each peer adapts: its embedding must
be the scikit-learn (or umap-learn) class's own, number for number, and the grid capping
rules must give values those classes accept.
"""

import importlib.util
import sys

import numpy as np
import pytest
import sklearn.manifold as manifold
from numpy.testing import assert_allclose, assert_array_equal
from threadpoolctl import threadpool_limits

import lowdim.methods as registry
from lowdim import datasets
from lowdim.errors import InputError
from lowdim.methods import get_method, has_transform, method_names, method_unavailable
from lowdim.methods.peers import (
    COST_TIERS,
    FAST_SECONDS,
    HessianLLEEmbedding,
    IsomapEmbedding,
    LLEEmbedding,
    SmacofMDS,
    TSNEEmbedding,
    UMAPEmbedding,
    peer_names,
    peer_tables,
)
from lowdim.run.runner import run_suite
from lowdim.run.store import Store
from lowdim.run.suites import suite_from_dict

SKLEARN_PEERS = ["isomap", "lle", "lle_modified", "lle_hessian", "ltsa", "tsne", "smacof"]
LLE_FORMS = {"lle": "standard", "lle_modified": "modified", "lle_hessian": "hessian"}
# Settings that keep each fit short on 150 points; everything else is the default.
SMALL = {"tsne": {"max_iter": 300}}


def sklearn_reference(name: str, params: dict):
    """The scikit-learn class a peer adapts, built here independently of the adapter."""
    params = dict(params)
    if name == "isomap":
        return manifold.Isomap(**params)
    if name in LLE_FORMS or name == "ltsa":
        form = LLE_FORMS.get(name, "ltsa")
        params["eigen_solver"] = params["eigen_solver"] or ("auto" if name == "lle" else "dense")
        return manifold.LocallyLinearEmbedding(**params, method=form)
    if name == "tsne":
        return manifold.TSNE(**params)
    if name == "smacof":
        return manifold.MDS(**params, metric_mds=True, metric="euclidean")
    raise KeyError(name)


@pytest.fixture(autouse=True)
def one_thread():
    """One thread, as the runner's jobs have: t-SNE's OpenMP gradient crawls on shared cores."""
    with threadpool_limits(limits=1):
        yield


@pytest.fixture(scope="module")
def noisy_roll():
    """A swiss roll lifted into 10 dimensions with noise: 150 x 10."""
    spec = {"name": "swiss_roll", "n": 150, "noise": 0.3, "ambient_dim": 10, "seed": 0}
    return datasets.load(spec).X


def _fitted(name: str, X: np.ndarray, **extra):
    cls = get_method(name)
    params = cls().get_params()
    if "random_state" in params:
        extra.setdefault("random_state", 0)
    return cls(**{**SMALL.get(name, {}), **extra}).fit(X)


def test_peers_follow_the_spectral_methods_in_the_registry():
    names = method_names()
    assert names[5 : 5 + len(peer_names())] == peer_names()
    assert peer_names() == [*SKLEARN_PEERS, "umap"]


def test_a_peer_name_cannot_be_taken_by_a_plugin(monkeypatch):
    monkeypatch.setattr(registry, "_ADDED", {})
    monkeypatch.setattr(registry, "_ORIGIN", {})
    with pytest.raises(InputError, match=r"taken by the built-in .*peers\.TSNEEmbedding"):

        @registry.register_method("tsne")
        class Impostor:
            pass


@pytest.mark.parametrize("name", SKLEARN_PEERS)
def test_embedding_is_scikit_learns_own(name, noisy_roll):
    # Outside reference: the scikit-learn class itself, same data, parameters and seed.
    model = _fitted(name, noisy_roll)
    reference = sklearn_reference(name, model.get_params()).fit_transform(noisy_roll)
    assert model.embedding_.shape == (150, 2)
    assert_array_equal(model.embedding_, reference)
    assert_array_equal(model.fit_transform(noisy_roll), reference)
    assert model.n_features_in_ == 10


@pytest.mark.parametrize("name", ["isomap", "lle"])
def test_transform_is_scikit_learns_own(name, noisy_roll):
    # Outside reference: scikit-learn's transform of the same fitted model.
    model = _fitted(name, noisy_roll[:120])
    reference = sklearn_reference(name, model.get_params()).fit(noisy_roll[:120])
    assert_allclose(model.transform(noisy_roll[120:]), reference.transform(noisy_roll[120:]))


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("isomap", True),
        ("lle", True),
        ("lle_modified", False),
        ("lle_hessian", False),
        ("ltsa", False),
        ("tsne", False),
        ("smacof", False),
        ("umap", True),
    ],
)
def test_which_peers_embed_new_points(name, expected):
    # scikit-learn's TSNE and MDS have no transform (their API reference); the other LLE
    # forms only borrow standard LLE's barycentric rule, so the adapters offer none.
    assert has_transform(name) is expected
    assert hasattr(get_method(name), "transform") is expected


def test_scikit_learns_tsne_and_mds_have_no_transform():
    assert not hasattr(manifold.TSNE, "transform") and not hasattr(manifold.MDS, "transform")


def test_a_peer_without_transform_has_no_such_method(noisy_roll):
    model = _fitted("tsne", noisy_roll)
    with pytest.raises(AttributeError):
        model.transform(noisy_roll)


def test_borrowed_lle_rule_does_not_reproduce_hessian_embedding():
    # Why Hessian LLE has no transform: scikit-learn's barycentric rule applied to the
    # training points does not give back the Hessian embedding (scikit-learn's
    # check_transformer_general data: make_blobs, 30 points, centres [0,0,0], [1,1,1]).
    from sklearn.datasets import make_blobs

    X, _ = make_blobs(30, centers=[[0, 0, 0], [1, 1, 1]], cluster_std=0.1, random_state=0)
    X -= X.min() - 0.1
    ref = manifold.LocallyLinearEmbedding(
        n_neighbors=6, method="hessian", eigen_solver="dense", random_state=0
    )
    embedding = ref.fit_transform(X)
    assert np.abs(ref.transform(X) - embedding).max() > 1e-2


def test_supports_transform_overrides_an_inherited_method():
    class Pretends(LLEEmbedding):
        supports_transform = False

    assert has_transform(Pretends) is False
    assert has_transform(LLEEmbedding) is True


def test_fitted_attributes_are_the_underlying_estimators(noisy_roll):
    tsne = _fitted("tsne", noisy_roll)
    assert tsne.kl_divergence_ == tsne.estimator_.kl_divergence_ and tsne.n_iter_ >= 250
    smacof = _fitted("smacof", noisy_roll)
    assert smacof.stress_ == smacof.estimator_.stress_
    hessian = _fitted("lle_hessian", noisy_roll)
    assert hessian.eigen_solver_ == "dense"
    assert _fitted("lle", noisy_roll).eigen_solver_ == "auto"


def test_smacof_from_classical_mds_ignores_the_seed(noisy_roll):
    # The classical MDS start is deterministic (scikit-learn's MDS docs: n_init is ignored).
    a = _fitted("smacof", noisy_roll, random_state=0).embedding_
    b = _fitted("smacof", noisy_roll, random_state=5).embedding_
    assert_array_equal(a, b)


def test_peers_run_through_the_runner_and_are_scored(tmp_path):
    data = {
        "suite": {"name": "peers", "seeds": [0], "neighbors": [5, 10]},
        "datasets": [{"name": "swiss_roll", "n": 150, "noise": 0.05}],
        "methods": [{"name": name, **SMALL.get(name, {})} for name in SKLEARN_PEERS],
    }
    summary = run_suite(suite_from_dict(data, source="peers.toml"), tmp_path, quiet=True)
    assert summary.counts == {"ok": len(SKLEARN_PEERS)}
    X = datasets.load({"name": "swiss_roll", "n": 150, "noise": 0.05, "seed": 0}).X
    with Store(tmp_path) as store:
        jobs = {row["method"]: row for row in store.jobs()}
        scores = {(job, metric, k): v for job, _, _, _, metric, k, v in store.score_rows()}
    for name in SKLEARN_PEERS:
        embedding = np.load(tmp_path / "embeddings" / f"{jobs[name]['job_id']}.npy")
        # Outside reference: scikit-learn's class on the same data with seed 0.
        params = get_method(name)(**SMALL.get(name, {})).get_params()
        if "random_state" in params:
            params["random_state"] = 0
        assert_allclose(embedding, sklearn_reference(name, params).fit_transform(X))
        # a swiss roll embedded by any of them keeps most 5-neighbourhoods (well above the
        # 0.5 of a random map, Venna & Kaski 2001)
        assert 0.6 < scores[(jobs[name]["job_id"], "trustworthiness", 5)] <= 1.0


@pytest.mark.parametrize(
    ("estimator", "message"),
    [
        (
            TSNEEmbedding(perplexity=200.0),
            r"the parameter `perplexity` of `TSNEEmbedding` must be a number in "
            r"\(0, n_samples\), got 200\.0",
        ),
        (
            HessianLLEEmbedding(n_neighbors=5),
            r"the parameter `n_neighbors` of `HessianLLEEmbedding` must be an int >= 6 for "
            r"n_components=2, got 5",
        ),
        (
            IsomapEmbedding(n_neighbors=150),
            r"the parameter `n_neighbors` of `IsomapEmbedding` must be an int in "
            r"\[1, n_samples - 1\], got 150",
        ),
        (
            SmacofMDS(init="pca"),
            r"the parameter `init` of `SmacofMDS` must be one of 'classical_mds', 'random', "
            r"got 'pca'",
        ),
    ],
)
def test_bad_parameters_get_the_projects_wording(estimator, message, noisy_roll):
    with pytest.raises(InputError, match=message):
        estimator.fit(noisy_roll)


def test_hessian_rule_is_scikit_learns(noisy_roll):
    # scikit-learn refuses n_neighbors <= n_components (n_components + 3) / 2 for Hessian LLE
    assert HessianLLEEmbedding.min_neighbors(2) == 6
    assert HessianLLEEmbedding.min_neighbors(3) == 10
    with pytest.raises(ValueError, match="n_neighbors must be greater than"):
        manifold.LocallyLinearEmbedding(n_neighbors=5, method="hessian").fit(noisy_roll)


def test_a_bad_value_in_a_suite_is_one_line_before_anything_runs():
    data = {
        "suite": {"name": "bad"},
        "datasets": [{"name": "swiss_roll", "n": 100}],
        "methods": [{"name": "tsne", "grid": {"perplexity": [30, -1]}}],
    }
    with pytest.raises(InputError) as info:
        suite_from_dict(data, source="bad.toml")
    text = str(info.value)
    assert "\n" not in text
    assert text == (
        "bad.toml: the 1st [[methods]]: the parameter `perplexity` of `TSNEEmbedding` must be "
        "a number in (0, n_samples), got -1"
    )


# --- the compare grids ---------------------------------------------------------------------


def test_every_peer_declares_a_tier_and_a_grid():
    for name in peer_names():
        cls = get_method(name)
        assert cls.cost_tier in COST_TIERS
        assert set(cls.compare_grid) <= {"n_neighbors", "perplexity"}
    assert FAST_SECONDS > 0


def test_standard_sweep_has_the_fast_peers_and_names_the_rest():
    tables, left_out = peer_tables("fast", 700)
    names = [t["name"] for t in tables]
    assert names == [n for n in peer_names() if get_method(n).cost_tier == "fast"]
    slow = [n for n in peer_names() if get_method(n).cost_tier == "slow"]
    reasons = dict(left_out)
    assert sorted(reasons) == sorted(slow)
    for name in slow:
        assert reasons[name].startswith("slow tier: only in the full sweep")
    if importlib.util.find_spec("umap") is None:
        assert reasons["umap"].endswith("pip install 'lowdim[peers]'")
    isomap = tables[names.index("isomap")]
    assert isomap == {"name": "isomap", "label": "isomap", "grid": {"n_neighbors": [5, 10, 30]}}
    assert {"name": "smacof"} in tables


@pytest.mark.skipif(importlib.util.find_spec("umap") is None, reason="umap-learn not installed")
def test_full_sweep_has_every_installed_peer():
    tables, left_out = peer_tables("slow", 700)
    assert [t["name"] for t in tables] == peer_names() and left_out == []


def test_unknown_tier_is_refused():
    with pytest.raises(InputError, match="the peer tier must be one of fast, slow, got 'all'"):
        peer_tables("all", 100)


def test_grids_are_capped_to_what_runs_on_few_rows():
    tables, left_out = peer_tables("slow", 12, installed_only=False)
    grids = {t["name"]: t.get("grid", {}) for t in tables}
    assert left_out == []
    assert grids["isomap"] == {"n_neighbors": [5, 10, 11]}
    assert grids["lle_hessian"] == {"n_neighbors": [10, 11]}
    # perplexity below n / 3 = 4 (Barnes-Hut looks at 3 x perplexity neighbours)
    assert grids["tsne"] == {"perplexity": [3]}
    assert grids["umap"] == {"n_neighbors": [5, 11]}


def test_capped_values_run_in_scikit_learn_on_those_rows():
    # Outside reference: scikit-learn accepts every capped setting on 12 rows.
    X = np.random.default_rng(0).normal(size=(12, 4))
    tables, _ = peer_tables("slow", 12, installed_only=False)
    for table in tables:
        if table["name"] == "umap":
            continue
        for key, values in table.get("grid", {}).items():
            for value in values:
                params = get_method(table["name"])(**{key: value}).get_params()
                if "random_state" in params:
                    params["random_state"] = 0
                params.update(SMALL.get(table["name"], {}))
                Y = sklearn_reference(table["name"], params).fit_transform(X)
                assert np.isfinite(Y).all()


def test_hessian_needs_more_rows_than_its_smallest_neighbourhood():
    tables, left_out = peer_tables("fast", 6)
    assert "lle_hessian" not in [t["name"] for t in tables]
    assert ("lle_hessian", "needs at least 7 rows, the data has 6") in left_out
    tables, left_out = peer_tables("fast", 6, n_components=1)
    # one dimension: more than 1 * 4 / 2 = 2 neighbours
    assert {"name": "lle_hessian", "label": "lle_hessian", "grid": {"n_neighbors": [5]}} in tables


def test_tsne_needs_four_rows():
    _, left_out = peer_tables("slow", 3, installed_only=False)
    assert ("tsne", "needs at least 4 rows, the data has 3") in left_out


def test_quick_keeps_the_lower_middle_of_each_grid():
    tables, _ = peer_tables("slow", 700, installed_only=False, quick=True)
    grids = {t["name"]: t.get("grid") for t in tables}
    assert grids["isomap"] == {"n_neighbors": [10]}
    assert grids["tsne"] == {"perplexity": [30]}
    assert grids["lle"] == {"n_neighbors": [10]}
    assert grids["smacof"] is None


# --- UMAP: optional ---------------------------------------------------------------------------


@pytest.fixture
def without_umap(monkeypatch):
    """As if umap-learn were not installed: importing ``umap`` fails."""
    monkeypatch.setitem(sys.modules, "umap", None)


def test_missing_umap_names_the_extra(without_umap, noisy_roll):
    expected = "needs umap-learn, which is not installed: pip install 'lowdim[peers]'"
    assert UMAPEmbedding.unavailable() == expected
    assert method_unavailable("umap") == f"the method 'umap' {expected}"
    assert registry.method_origin("umap") == (
        "umap-learn, not installed: pip install 'lowdim[peers]'"
    )
    with pytest.raises(InputError, match=r"`UMAPEmbedding` needs umap-learn.*lowdim\[peers\]"):
        UMAPEmbedding().fit(noisy_roll)
    _, left_out = peer_tables("slow", 700)
    assert ("umap", expected) in left_out
    _, left_out = peer_tables("fast", 700)
    assert ("umap", f"slow tier: only in the full sweep; {expected}") in left_out
    tables, _ = peer_tables("slow", 700, installed_only=False)
    assert "umap" in [t["name"] for t in tables]


def test_missing_umap_stops_a_suite_in_one_line(without_umap):
    data = {
        "suite": {"name": "needs_umap"},
        "datasets": [{"name": "swiss_roll", "n": 100}],
        "methods": [{"name": "pca"}, {"name": "umap"}],
    }
    with pytest.raises(InputError) as info:
        suite_from_dict(data, source="u.toml")
    assert str(info.value) == (
        "u.toml: the 2nd [[methods]]: the method 'umap' needs umap-learn, which is not "
        "installed: pip install 'lowdim[peers]'"
    )


def test_old_scikit_learn_leaves_smacof_out(monkeypatch):
    from lowdim.methods.peers import _adapter

    monkeypatch.setattr(_adapter, "_version", lambda package: "1.7.2")
    reason = "needs scikit-learn >= 1.8, found 1.7.2: pip install -U scikit-learn"
    assert SmacofMDS.unavailable() == reason
    assert IsomapEmbedding.unavailable() is None
    assert ("smacof", reason) in peer_tables("fast", 700)[1]


def test_umap_embedding_is_umap_learns_own():
    umap = pytest.importorskip("umap")
    X = datasets.load({"name": "swiss_roll", "n": 150, "noise": 0.3, "seed": 0}).X
    model = UMAPEmbedding(random_state=0, n_epochs=50).fit(X)
    # Outside reference: umap.UMAP itself with the same parameters and seed.
    params = model.get_params()
    reference = umap.UMAP(**params).fit(X)
    assert_array_equal(model.embedding_, reference.embedding_)
    assert_allclose(model.transform(X[:10]), reference.transform(X[:10]), rtol=1e-5, atol=1e-5)


def test_umap_runs_through_the_runner(tmp_path):
    pytest.importorskip("umap")
    data = {
        "suite": {"name": "umap", "seeds": [0], "neighbors": [5, 10]},
        "datasets": [{"name": "swiss_roll", "n": 150, "noise": 0.05}],
        "methods": [{"name": "umap", "n_epochs": 50}],
    }
    summary = run_suite(suite_from_dict(data, source="umap.toml"), tmp_path, quiet=True)
    assert summary.counts == {"ok": 1}
    with Store(tmp_path) as store:
        values = {(metric, k): v for _, _, _, _, metric, k, v in store.score_rows()}
    assert 0.6 < values[("trustworthiness", 5)] <= 1.0
