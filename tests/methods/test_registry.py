"""The method registry: built-ins, plugin files, entry points and import targets."""

import sys
import textwrap

import pytest

import lowdim.methods as registry
from lowdim.errors import InputError
from lowdim.methods import (
    PluginError,
    get_method,
    import_object,
    load_entry_points,
    load_plugin,
    method_names,
    register_method,
)

BUILTINS = ["pca", "classical_mds", "kernel_pca", "laplacian_eigenmaps", "diffusion_maps"]


@pytest.fixture
def clean_registry(monkeypatch):
    monkeypatch.setattr(registry, "_ADDED", {})
    monkeypatch.setattr(registry, "_ORIGIN", {})
    monkeypatch.setattr(registry, "_entry_points_loaded", False)
    yield


def test_builtins_are_listed_first(clean_registry):
    assert method_names()[:5] == BUILTINS


def test_unknown_method_suggests_closest(clean_registry):
    with pytest.raises(
        InputError, match=r"unknown method 'kernel_pac' \(did you mean 'kernel_pca'\?\)"
    ):
        get_method("kernel_pac")


def test_register_and_get(clean_registry):
    @register_method("my_embedding")
    class Mine:
        pass

    assert get_method("my_embedding") is Mine
    assert "my_embedding" in method_names()


def test_taken_name_is_refused_naming_both(clean_registry):
    @register_method("twice")
    class First:
        pass

    with pytest.raises(InputError, match=r"Second.*'twice'.*taken by .*First"):

        @register_method("twice")
        class Second:
            pass


def test_builtin_name_is_refused(clean_registry):
    with pytest.raises(
        InputError, match=r"taken by the built-in lowdim\.methods\.linear\.PCAEmbedding"
    ):

        @register_method("pca")
        class Impostor:
            pass


def test_plugin_file_registers_methods(clean_registry, tmp_path):
    plugin = tmp_path / "shrink_plugin.py"
    plugin.write_text(
        textwrap.dedent(
            """
            from sklearn.base import BaseEstimator, TransformerMixin
            from lowdim.methods import register_method

            @register_method("first_two_columns")
            class FirstTwo(TransformerMixin, BaseEstimator):
                def fit(self, X, y=None):
                    return self

                def transform(self, X):
                    return X[:, :2]
            """
        )
    )
    assert load_plugin(plugin) == ["first_two_columns"]
    cls = get_method("first_two_columns")
    assert cls.__name__ == "FirstTwo"


def test_missing_plugin_is_a_usage_error(tmp_path):
    with pytest.raises(InputError, match="plugin file .*nowhere.py.* not found"):
        load_plugin(tmp_path / "nowhere.py")


def test_broken_plugin_is_the_plugins_fault(clean_registry, tmp_path):
    plugin = tmp_path / "broken_plugin.py"
    plugin.write_text("import numpy\nraise RuntimeError('solver not built')\n")
    with pytest.raises(
        PluginError, match="broken_plugin.py.*failed to import: RuntimeError: solver not built"
    ):
        load_plugin(plugin)


def test_entry_points_are_loaded_once(clean_registry, tmp_path, monkeypatch):
    # A fake installed distribution, found by importlib.metadata on sys.path (the pluggy way).
    pkg = tmp_path / "ridge_embed"
    pkg.mkdir()
    (pkg / "__init__.py").write_text("class RidgeEmbedding:\n    pass\n")
    dist = tmp_path / "ridge_embed-1.0.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: ridge-embed\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text(
        "[lowdim.methods]\nridge = ridge_embed:RidgeEmbedding\n"
    )
    monkeypatch.syspath_prepend(str(tmp_path))
    assert load_entry_points() == 1
    assert load_entry_points() == 0
    assert get_method("ridge").__name__ == "RidgeEmbedding"
    sys.modules.pop("ridge_embed", None)


def test_import_object_resolves_and_words_mistakes():
    from sklearn.decomposition import PCA

    assert import_object("sklearn.decomposition:PCA") is PCA
    with pytest.raises(InputError, match=r"has no attribute 'PCAA' \(did you mean 'PCA'\?\)"):
        import_object("sklearn.decomposition:PCAA")
    with pytest.raises(InputError, match="no module named 'no_such_pkg'"):
        import_object("no_such_pkg.mod:Thing")
    with pytest.raises(InputError, match="must look like 'package.module:ClassName'"):
        import_object("sklearn.decomposition.PCA")
