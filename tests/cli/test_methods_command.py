"""`lowdim methods`: every method with where it comes from, the peers included."""

import importlib.metadata
import sys

import pytest

import lowdim.methods as registry
from lowdim.cli import main
from lowdim.methods.peers import peer_names

SKLEARN = importlib.metadata.version("scikit-learn")


def test_listing_names_each_peer_with_its_package_and_class(capsys, monkeypatch):
    # only what lowdim registers itself: plugins other tests loaded stay out of the listing
    monkeypatch.setattr(registry, "_ADDED", {})
    monkeypatch.setattr(registry, "_ORIGIN", {})
    assert main(["methods"]) == 0
    out = capsys.readouterr().out
    # the version is the installed distribution's own (importlib.metadata)
    for line in [
        f"isomap  (scikit-learn {SKLEARN}: sklearn.manifold.Isomap)",
        f"lle  (scikit-learn {SKLEARN}: "
        "sklearn.manifold.LocallyLinearEmbedding(method='standard'))",
        f"lle_hessian  (scikit-learn {SKLEARN}: "
        "sklearn.manifold.LocallyLinearEmbedding(method='hessian'))",
        f"ltsa  (scikit-learn {SKLEARN}: sklearn.manifold.LocallyLinearEmbedding(method='ltsa'))",
        f"tsne  (scikit-learn {SKLEARN}: sklearn.manifold.TSNE)",
        f"smacof  (scikit-learn {SKLEARN}: sklearn.manifold.MDS(metric_mds=True))",
        "pca  (lowdim.methods.linear.PCAEmbedding)",
    ]:
        assert line in out.splitlines()
    for name in peer_names():
        assert any(line.startswith(f"{name}  (") for line in out.splitlines())


def test_one_peer_is_described_not_unknown(capsys):
    assert main(["methods", "isomap"]) == 0
    out = capsys.readouterr().out
    assert "unknown" not in out
    assert "paper: Tenenbaum, de Silva & Langford, Science 290, 2000" in out
    assert "compare: n_neighbors in 5, 10, 30 (fast: in the standard sweep)" in out
    assert "    n_neighbors         = 5" in out
    assert "transform: none" not in out


def test_a_peer_without_transform_says_so(capsys):
    assert main(["methods", "tsne", "smacof"]) == 0
    out = capsys.readouterr().out
    assert out.count("transform: none (it embeds only the rows it was fitted on)") == 2
    assert "compare: perplexity in 10, 30, 50 (slow: in the full sweep only)" in out


def test_missing_umap_is_listed_with_the_extra(capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "umap", None)
    assert main(["methods", "umap"]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0] == "umap  (umap-learn, not installed: pip install 'lowdim[peers]')"


def test_installed_umap_names_its_version(capsys):
    pytest.importorskip("umap")
    assert main(["methods", "umap"]) == 0
    version = importlib.metadata.version("umap-learn")
    assert capsys.readouterr().out.splitlines()[0] == f"umap  (umap-learn {version}: umap.UMAP)"


def test_a_suite_with_umap_missing_stops_in_one_line(capsys, monkeypatch, tmp_path):
    monkeypatch.setitem(sys.modules, "umap", None)
    suite = tmp_path / "maps.toml"
    suite.write_text(
        '[suite]\nname = "maps"\n[[datasets]]\nname = "swiss_roll"\nn = 100\n'
        '[[methods]]\nname = "isomap"\n[[methods]]\nname = "umap"\n'
    )
    out = tmp_path / "out"
    assert main(["run", str(suite), "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert "the 2nd [[methods]]: the method 'umap' needs umap-learn" in err
    assert "pip install 'lowdim[peers]'" in err
    assert not out.exists()
