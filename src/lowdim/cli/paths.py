"""Checks of the paths a command writes to, before any work starts.

A results folder given with ``--out`` must be a folder (or not exist yet, with an existing,
writable folder above it), lowdim must be allowed to write there, and it must be lowdim's (new,
empty, or written by lowdim: :func:`lowdim.run.folder.check_results_folder`); an output file's
folder must exist and be writable. Each problem is one line naming the option and the path.
A leading ``~`` is the user's home, as the shell would have it (a quoted ``"~/results"`` reaches
lowdim unexpanded): lowdim never makes a folder named ``~``.
"""

from __future__ import annotations

import os
from pathlib import Path

from lowdim.errors import InputError
from lowdim.run.folder import check_results_folder

__all__ = ["user_path", "check_out_folder", "check_out_file_folder"]


def user_path(path: str | Path) -> Path:
    """``path`` with a leading ``~`` or ``~user`` expanded, as the shell would."""
    return Path(os.path.expanduser(str(path)))


def _writable(folder: Path) -> bool:
    return os.access(folder, os.W_OK | os.X_OK)


def check_out_folder(path: str | Path, option: str = "--out") -> Path:
    """Return ``path`` (``~`` expanded) if lowdim can create or write the results folder
    there."""
    path = user_path(path)
    if path.exists() and not path.is_dir():
        raise InputError(
            f"{option} {str(path)!r} is a file, not a folder; give a folder for the results "
            "(it is created if missing)"
        )
    existing = path
    while not existing.exists():
        if existing.is_symlink():
            raise InputError(
                f"{option} {str(path)!r}: {str(existing)!r} is a symbolic link that leads "
                "nowhere (or to itself); give another folder"
            )
        existing = existing.parent
    if not existing.is_dir():
        raise InputError(
            f"{option} {str(path)!r}: {str(existing)!r} is a file, so no folder can be made "
            "below it; give another folder"
        )
    if not _writable(existing):
        what = "the results folder" if existing == path else f"the folder {str(existing)!r}"
        raise InputError(
            f"{option} {str(path)!r}: {what} is not writable; choose a folder you can write "
            "to, or change its permissions"
        )
    return check_results_folder(path, option)


def check_out_file_folder(path: str | Path, option: str = "--out") -> Path:
    """Return ``path`` (``~`` expanded) if its folder exists and is writable (the file itself
    is replaced)."""
    path = user_path(path)
    folder = path.parent
    if not folder.is_dir():
        raise InputError(
            f"{option} {str(path)!r}: the folder {str(folder)!r} does not exist; create it first"
        )
    if not _writable(folder):
        raise InputError(
            f"{option} {str(path)!r}: the folder {str(folder)!r} is not writable; choose "
            "another place or change its permissions"
        )
    return path
