"""Bad input on the command line: one line on stderr, exit status 2, nothing written.

Each case runs the real command line (``lowdim.cli.main``, in process, so the suite stays
quick; one case goes through a subprocess to check that no traceback reaches the user).
"""

import subprocess
import sys
import textwrap

import numpy as np
import pytest
from cli_helpers import assert_one_line_error, run_cli

import lowdim.cli.embed as embed_command

GOOD_ROWS = "".join(f"{i},{np.sin(i):.4f},{np.cos(i):.4f}\n" for i in range(40))

# name -> (file contents, a fragment the message must hold)
BAD_FILES = {
    "empty.csv": (b"", "is empty"),
    "header_only.csv": (b"depth,salinity,oxygen\n", "header line but no data rows"),
    "binary.csv": (bytes(range(256)) * 8, "looks like a binary file"),
    "latin1.csv": ("depth,site\n1,Bourg\xe9\n2,Lille\n".encode("latin-1"), "not UTF-8"),
    "nan.csv": (b"depth,salinity\n1,35.1\n2,\n3,35.3\n", "missing values"),
    "inf.csv": (b"depth,salinity\n1,35.1\n2,inf\n3,35.3\n", "infinite values"),
    "text.csv": (b"depth,salinity\n1,35.1\n2,salty\n3,35.3\n", "holds text where numbers"),
    "one_row.csv": (b"depth,salinity\n1,35.1\n", "only one data row"),
    "identical.csv": (b"depth,salinity\n" + b"4,35.0\n" * 6, "nothing to reduce"),
}


@pytest.fixture
def folder(tmp_path):
    """A data folder, and an output folder that must stay empty."""
    (tmp_path / "out").mkdir()
    return tmp_path


def left_behind(folder):
    return sorted(p.name for p in (folder / "out").iterdir())


@pytest.mark.parametrize("name", sorted(BAD_FILES))
@pytest.mark.parametrize("command", ["embed", "compare"])
def test_bad_data_file(command, name, folder, capsys):
    content, fragment = BAD_FILES[name]
    path = folder / name
    path.write_bytes(content)
    if command == "embed":
        args = ["embed", str(path), "--method", "pca", "--out", str(folder / "out" / "e.csv")]
    else:
        args = ["compare", str(path), "--quick", "--out", str(folder / "out" / "results")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, fragment)
    assert left_behind(folder) == []


@pytest.mark.parametrize("command", ["embed", "compare"])
def test_missing_file(command, folder, capsys):
    args = [command, str(folder / "absent.csv"), "--out", str(folder / "out" / "x.csv")]
    if command == "embed":
        args += ["--method", "pca"]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "data file")
    assert left_behind(folder) == []


@pytest.fixture
def reef(folder):
    """A made-up reef survey: 40 transects, three numeric readings."""
    path = folder / "reef.csv"
    path.write_text("transect,cover,turbidity\n" + GOOD_ROWS)
    return path


@pytest.mark.parametrize(
    "method, settings, fragment",
    [
        ("kernel_pac", [], "unknown method 'kernel_pac' (did you mean 'kernel_pca'?)"),
        ("kernel_pca", ["bandwith=median"], "unknown parameter `bandwith` of kernel_pca"),
        ("kernel_pca", ["bandwith=median"], "(did you mean 'bandwidth'?)"),
        ("kernel_pca", ["bandwidth=medain"], "(did you mean 'median'?)"),
        ("laplacian_eigenmaps", ["n_neighbors=0"], "`n_neighbors`"),
        ("laplacian_eigenmaps", ["n_neighbors=-3"], "got -3"),
        # Known to be too large only once the 40 rows are read: the method's own fit check.
        ("laplacian_eigenmaps", ["n_neighbors=40"], "n_neighbors"),
        ("pca", ["n_components=40"], "n_components"),
        ("diffusion_maps", ["n_components=45"], "n_components"),
        ("pca", ["solver"], "must look like key=value"),
    ],
)
def test_bad_method_settings(method, settings, fragment, reef, folder, capsys):
    args = ["embed", str(reef), "--method", method, "--out", str(folder / "out" / "e.csv")]
    for item in settings:
        args += ["--set", item]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, fragment)
    assert left_behind(folder) == []


def test_bad_output_extension(reef, folder, capsys):
    args = ["embed", str(reef), "--method", "pca", "--out", str(folder / "out" / "e.xlsx")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "must end in .csv or .npy")
    assert left_behind(folder) == []


def test_unknown_label_column(reef, folder, capsys):
    args = ["compare", str(reef), "--labels", "species", "--out", str(folder / "out" / "r")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "species")
    assert left_behind(folder) == []


@pytest.mark.parametrize(
    "target, fragment",
    [
        ("nosuch.module:Thing", "--with: cannot import 'nosuch.module:Thing': no module named"),
        ("sklearn.linear_model:LinearRegression", "is not a transformer"),
        ("sklearn.manifold:NoSuchEmbedding", "has no attribute 'NoSuchEmbedding'"),
    ],
)
def test_a_with_that_is_not_a_transformer_writes_nothing(target, fragment, reef, folder, capsys):
    args = ["compare", str(reef), "--quick", "--with", target, "--out", str(folder / "out" / "r")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, fragment)
    assert left_behind(folder) == []


def test_suite_that_is_not_toml(folder, capsys):
    suite = folder / "broken.toml"
    suite.write_text('[suite]\nname = "reef\n')
    args = ["run", str(suite), "--out", str(folder / "out" / "r")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "not valid TOML")
    assert left_behind(folder) == []


def test_suite_with_an_unknown_key(folder, capsys):
    suite = folder / "typo.toml"
    suite.write_text(
        textwrap.dedent(
            """
            [suite]
            name = "reef"
            seedz = [0, 1]

            [[datasets]]
            name = "swiss_roll"

            [[methods]]
            name = "pca"
            """
        )
    )
    args = ["run", str(suite), "--out", str(folder / "out" / "r")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "unknown key `seedz` (did you mean 'seeds'?)")
    assert left_behind(folder) == []


@pytest.mark.parametrize("old_name", ["helix", "twin_peaks", "broken_swiss_roll"])
def test_a_retired_family_name_is_an_unknown_dataset(old_name, folder, capsys):
    # These families are called coiled_ring, peaked_sheet and swiss_gap; no alias is kept.
    suite = folder / "retired.toml"
    suite.write_text(
        f'[suite]\nname = "reef"\n[[datasets]]\nname = "{old_name}"\n[[methods]]\nname = "pca"\n'
    )
    args = ["run", str(suite), "--out", str(folder / "out" / "r")]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, f"unknown dataset {old_name!r}")
    assert "the known datasets are" in err
    for family in ["coiled_ring", "peaked_sheet", "swiss_gap", "swiss_roll"]:
        assert family in err
    assert left_behind(folder) == []


def test_internal_error_is_called_a_defect_with_a_log(reef, folder, capsys, monkeypatch):
    def broken_writer(*args, **kwargs):
        raise RuntimeError("the writer lost its place")

    monkeypatch.setattr(embed_command, "write_embedding", broken_writer)
    args = ["embed", str(reef), "--method", "pca", "--out", str(folder / "out" / "e.csv")]
    status, _, err = run_cli(args, capsys)
    assert status == 1
    assert err.count("\n") == 1
    assert "internal error (a defect in lowdim, please report it)" in err
    log = err.rsplit("traceback in ", 1)[1].strip()
    with open(log) as fh:
        assert "the writer lost its place" in fh.read()
    assert left_behind(folder) == []


def test_no_traceback_through_a_subprocess(folder):
    bad = folder / "binary.csv"
    bad.write_bytes(bytes(range(256)) * 8)
    proc = subprocess.run(
        [sys.executable, "-m", "lowdim", "compare", str(bad), "--out", str(folder / "out" / "r")],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Traceback" not in proc.stderr
    assert proc.stdout == ""
    assert left_behind(folder) == []
