"""Ordinary environment problems are one line and exit status 2, never a defect report.

An unreadable input, a symbolic link loop, an ``--out`` that is a file or cannot be written,
and a reader that closes the pipe early. Any other exception, a library's bare ValueError
included, is a defect: one line and a log with the traceback. Through the real command line
(``lowdim.cli.main`` in process; the closed pipe in a subprocess).
"""

from __future__ import annotations

import builtins
import errno
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import assert_one_line_error, run_cli

import lowdim.cli.embed as embed_command
import lowdim.cli.paths as paths_module
from lowdim.cli.main import environment_message

ROOT = os.geteuid() == 0  # root reads and writes whatever the permission bits say


@pytest.fixture
def beehive(tmp_path):
    """A made-up apiary log: hive weight, temperature and humidity over 40 days."""
    path = tmp_path / "hives.csv"
    rows = np.random.default_rng(5).normal(size=(40, 3))
    path.write_text(
        "weight,temperature,humidity\n" + "".join(f"{a},{b},{c}\n" for a, b, c in rows)
    )
    return path


@pytest.fixture
def suite(tmp_path, beehive):
    path = tmp_path / "hives.toml"
    path.write_text(
        '[suite]\nname = "hives"\nneighbors = [5]\nmetrics = ["trustworthiness"]\n'
        f'[[datasets]]\nfile = "{beehive.name}"\n[[methods]]\nname = "pca"\n'
    )
    return path


# --- unreadable input


def _deny(monkeypatch, target: Path) -> None:
    """Make opening ``target`` fail as the kernel answers a user without read permission."""
    real_open = builtins.open

    def guarded(file, *args, **kwargs):
        if isinstance(file, str | os.PathLike) and Path(file).resolve() == target.resolve():
            raise PermissionError(errno.EACCES, "Permission denied", str(file))
        return real_open(file, *args, **kwargs)

    monkeypatch.setattr(builtins, "open", guarded)


@pytest.mark.parametrize("command", ["embed", "compare", "run"])
def test_unreadable_input_is_one_line(command, beehive, suite, tmp_path, monkeypatch, capsys):
    target = suite if command == "run" else beehive
    _deny(monkeypatch, target)
    args = {
        "embed": ["embed", beehive, "--method", "pca", "--out", tmp_path / "e.csv"],
        "compare": ["compare", beehive, "--quick", "--out", tmp_path / "r"],
        "run": ["run", suite, "--out", tmp_path / "r"],
    }[command]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "cannot be read: permission denied", target.name)
    assert not (tmp_path / "r").exists() and not (tmp_path / "e.csv").exists()


def test_unreadable_data_file_named_in_a_suite(beehive, suite, tmp_path, monkeypatch, capsys):
    _deny(monkeypatch, beehive)
    status, _, err = run_cli(["run", suite, "--out", tmp_path / "r"], capsys)
    assert_one_line_error(status, err, "the 1st [[datasets]]", "(key `file`)", "permission")


@pytest.mark.skipif(ROOT, reason="root reads files whatever their permission bits")
def test_unreadable_input_by_permission_bits(beehive, tmp_path, capsys):
    beehive.chmod(0)
    try:
        args = ["embed", beehive, "--method", "pca", "--out", tmp_path / "e.csv"]
        status, _, err = run_cli(args, capsys)
    finally:
        beehive.chmod(0o644)
    assert_one_line_error(status, err, "permission denied")


# --- symbolic link loops


@pytest.mark.parametrize("command", ["embed", "compare", "run", "run-data"])
def test_a_symlink_loop_is_one_line(command, suite, tmp_path, capsys):
    loop = tmp_path / ("loop.toml" if command == "run" else "loop.csv")
    os.symlink(loop.name, loop)
    if command == "run-data":
        suite.write_text(suite.read_text().replace("hives.csv", "loop.csv"))
    args = {
        "embed": ["embed", loop, "--method", "pca", "--out", tmp_path / "e.csv"],
        "compare": ["compare", loop, "--quick", "--out", tmp_path / "r"],
        "run": ["run", loop, "--out", tmp_path / "r"],
        "run-data": ["run", suite, "--out", tmp_path / "r"],
    }[command]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "symbolic link that leads back to itself", "loop.")
    assert not (tmp_path / "r").exists()


# --- where the results go


@pytest.mark.parametrize("command", ["run", "compare", "embed"])
def test_out_that_is_a_file(command, beehive, suite, tmp_path, capsys):
    taken = tmp_path / "notes.txt"
    taken.write_text("the beekeeper's own notes\n")
    args = {
        "run": ["run", suite, "--out", taken],
        "compare": ["compare", beehive, "--quick", "--out", taken],
        "embed": ["embed", beehive, "--method", "pca", "--out", taken / "e.csv"],
    }[command]
    status, _, err = run_cli(args, capsys)
    fragment = "is a file, not a folder" if command != "embed" else "does not exist"
    assert_one_line_error(status, err, "--out", "notes.txt", fragment)
    assert taken.read_text() == "the beekeeper's own notes\n"


def test_out_below_a_file(suite, tmp_path, capsys):
    (tmp_path / "notes.txt").write_text("x\n")
    status, _, err = run_cli(["run", suite, "--out", tmp_path / "notes.txt" / "r"], capsys)
    assert_one_line_error(status, err, "is a file, so no folder can be made below it")


def _read_only(monkeypatch, folder: Path) -> None:
    """Answer as the kernel does for a user without write permission on ``folder``."""
    real_access = os.access

    def access(path, mode, *args, **kwargs):
        if Path(path).resolve() == folder.resolve() and mode & os.W_OK:
            return False
        return real_access(path, mode, *args, **kwargs)

    monkeypatch.setattr(paths_module.os, "access", access)


@pytest.mark.parametrize("command", ["run", "compare", "embed"])
def test_out_that_cannot_be_written(command, beehive, suite, tmp_path, monkeypatch, capsys):
    locked = tmp_path / "locked"
    locked.mkdir()
    _read_only(monkeypatch, locked)
    args = {
        "run": ["run", suite, "--out", locked / "r"],
        "compare": ["compare", beehive, "--quick", "--out", locked / "r"],
        "embed": ["embed", beehive, "--method", "pca", "--out", locked / "e.csv"],
    }[command]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "--out", "is not writable")
    assert list(locked.iterdir()) == []


@pytest.mark.skipif(ROOT, reason="root writes whatever the permission bits say")
def test_out_that_cannot_be_written_by_permission_bits(suite, tmp_path, capsys):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        status, _, err = run_cli(["run", suite, "--out", locked / "r"], capsys)
    finally:
        locked.chmod(0o755)
    assert_one_line_error(status, err, "is not writable")


# --- a reader that goes away


def test_a_closed_pipe_ends_quietly(tmp_path):
    # `lowdim methods | head -1`, with the reader gone before the first write: the write
    # fails with EPIPE, which must end the command quietly, without a defect log.
    read_end, write_end = os.pipe()
    os.close(read_end)
    env = {**os.environ, "TMPDIR": str(tmp_path)}
    try:
        proc = subprocess.run(
            [sys.executable, "-m", "lowdim", "methods"],
            stdout=write_end,
            stderr=subprocess.PIPE,
            text=True,
            env=env,
            timeout=120,
        )
    finally:
        os.close(write_end)
    assert proc.returncode == 2
    assert proc.stderr == ""
    assert not list(tmp_path.glob("lowdim-defect-*"))


def test_a_pipe_read_to_the_end_is_untouched():
    proc = subprocess.run(
        f"{sys.executable} -m lowdim methods | head -1",
        shell=True,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.stdout.startswith("pca  (") and proc.stdout.count("\n") == 1
    assert proc.stderr == ""


# --- what is a defect


def test_a_bare_value_error_from_a_library_is_a_defect(beehive, tmp_path, monkeypatch, capsys):
    # Only the project's own InputError is the user's mistake; a ValueError raised below
    # lowdim means a check is missing, so it is reported as a defect with its traceback.
    def broken_fit_transform(self, X, y=None):
        raise ValueError("array must not contain infs or NaNs")

    method = embed_command.configure_method("pca", {})
    monkeypatch.setattr(type(method), "fit_transform", broken_fit_transform)
    args = ["embed", beehive, "--method", "pca", "--out", tmp_path / "e.csv"]
    status, _, err = run_cli(args, capsys)
    assert status == 1
    assert "internal error (a defect in lowdim, please report it): ValueError" in err
    log = err.rsplit("traceback in ", 1)[1].strip()
    with open(log) as fh:
        assert "array must not contain infs or NaNs" in fh.read()
    os.unlink(log)


def test_an_os_error_outside_the_environment_kinds_is_a_defect(beehive, monkeypatch, capsys):
    def failing(*args, **kwargs):
        raise OSError(errno.EIO, "Input/output error")

    monkeypatch.setattr(embed_command, "write_embedding", failing)
    status, _, err = run_cli(
        ["embed", beehive, "--method", "pca", "--out", beehive.with_suffix(".out.csv")], capsys
    )
    assert status == 1 and "internal error" in err
    os.unlink(err.rsplit("traceback in ", 1)[1].strip())


@pytest.mark.parametrize(
    "exc, words",
    [
        (PermissionError(errno.EACCES, "Permission denied", "/data/x.csv"), "permission denied"),
        (OSError(errno.ELOOP, "Too many levels of symbolic links", "a"), "points back at itself"),
        (OSError(errno.ENOSPC, "No space left on device", "/r"), "the disk is full"),
        (IsADirectoryError(errno.EISDIR, "Is a directory", "/r"), "a folder was given"),
    ],
)
def test_environment_messages_say_what_where_and_what_to_do(exc, words):
    # The wording follows the kernel's strerror for each errno (POSIX), then a hint.
    text = environment_message(exc)
    assert words in text and repr(exc.filename) in text and "\n" not in text


def test_a_plugin_methods_value_error_is_its_verdict_not_a_defect(beehive, tmp_path, capsys):
    # A plugin is not lowdim: its ValueError on the user's settings is shown as one line.
    plugin = tmp_path / "hive_plugin.py"
    plugin.write_text(
        "from sklearn.base import BaseEstimator, TransformerMixin\n"
        "from lowdim.methods import register_method\n\n"
        '@register_method("hive_projection")\n'
        "class HiveProjection(TransformerMixin, BaseEstimator):\n"
        "    def __init__(self, n_components=2, spread=1.0):\n"
        "        self.n_components = n_components\n"
        "        self.spread = spread\n\n"
        "    def fit(self, X, y=None):\n"
        "        if self.spread <= 0:\n"
        "            raise ValueError('spread must be positive')\n"
        "        return self\n\n"
        "    def transform(self, X):\n"
        "        return X[:, : self.n_components] * self.spread\n"
    )
    args = ["embed", beehive, "--method", "hive_projection", "--set", "spread=-1"]
    args += ["--plugin", plugin, "--out", tmp_path / "e.csv"]
    status, _, err = run_cli(args, capsys)
    assert_one_line_error(status, err, "hive_projection", "spread must be positive")
