"""``lowdim datasets``: every dataset with its parameters, defaults and source."""

from lowdim.cli import main
from lowdim.datasets import dataset_names, describe


def test_lists_every_dataset_and_the_file_and_openml_specs(capsys):
    assert main(["datasets"]) == 0
    out = capsys.readouterr().out
    for name in [*dataset_names(), "file", "openml"]:
        assert f"\n{name}  (" in "\n" + out
    assert "sklearn.datasets.load_iris" in out
    assert "TiCC TR 2009-005" in out


def test_shows_parameters_with_defaults_and_help(capsys):
    assert main(["datasets", "swiss_gap"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("swiss_gap  (generated)")
    assert "gap         = 0.4" in out and "# width of the removed band" in out
    for key, default in describe("swiss_gap")["parameters"].items():
        assert f"{key}" in out and repr(default) in out


def test_unknown_name_is_one_line_with_a_suggestion(capsys):
    assert main(["datasets", "iris", "coiled_rnig"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""  # nothing printed before the mistake is found
    assert captured.err.count("\n") == 1
    assert "unknown dataset 'coiled_rnig' (did you mean 'coiled_ring'?)" in captured.err
