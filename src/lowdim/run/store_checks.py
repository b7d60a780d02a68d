"""Checks of a results store's files: the database itself and each finished job's arrays.

lowdim writes every file atomically, but files can still be lost or damaged outside it: an
embedding deleted by hand, a copy cut short by a full disk, a ``store.sqlite`` that is another
program's database. These checks say which file and what is wrong, cheaply (array headers and
archive directories are read, never the data), so that the runner can recompute the job, the
report can name the file and ``lowdim status`` can say so. :mod:`lowdim.run.store` exports
them.
"""

from __future__ import annotations

import os
import sqlite3
import zipfile
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from lowdim.errors import InputError

__all__ = [
    "check_store_file",
    "damaged_store",
    "is_damage",
    "array_problem",
    "archive_problem",
    "job_file_problems",
]

_SQLITE_HEADER = b"SQLite format 3\x00"
_LOWDIM_TABLES = ("jobs", "scores", "runs")
_MOVE_AWAY = (
    "move it away (or delete it) and run the suite again into this folder: every job is then "
    "computed anew"
)


def damaged_store(path: Path, exc: sqlite3.DatabaseError) -> InputError:
    return InputError(
        f"the results store {str(path)!r} is damaged (SQLite says: {exc}); {_MOVE_AWAY}"
    )


def is_damage(exc: sqlite3.DatabaseError) -> bool:
    """Whether SQLite says the file is corrupt or not a database (not busy, not a bad query)."""
    code = getattr(exc, "sqlite_errorcode", None)
    if code is not None:
        return code & 0xFF in (sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB)
    text = str(exc)
    return "malformed" in text or "not a database" in text


def check_store_file(path: str | Path) -> None:
    """Refuse a ``store.sqlite`` that lowdim cannot have written, before anything touches it.

    An empty file is accepted (a run killed while creating its store); anything else must be
    an SQLite database holding lowdim's tables, or no table at all.

    Raises
    ------
    InputError
        Naming the file and what to do: when it is not an SQLite database, is damaged, or is
        an SQLite database of another program.
    """
    path = Path(path)
    with open(path, "rb") as fh:
        head = fh.read(len(_SQLITE_HEADER))
    if not head:
        return
    if head != _SQLITE_HEADER:
        raise InputError(
            f"{str(path)!r} is not a lowdim results store: it is not an SQLite database "
            f"(damaged, or another program's file); {_MOVE_AWAY}"
        )
    try:
        db = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)
        try:
            tables = {row[0] for row in db.execute("SELECT name FROM sqlite_master")}
            columns = {row[1] for row in db.execute("PRAGMA table_info(jobs)")}
        finally:
            db.close()
    except sqlite3.DatabaseError as exc:
        if is_damage(exc):
            raise damaged_store(path, exc) from None
        raise
    if tables and not ({"job_id", "status"} <= columns and "runs" in tables):
        raise InputError(
            f"{str(path)!r} is an SQLite database without lowdim's tables "
            f"({', '.join(_LOWDIM_TABLES)}): another program's file, not a results store; "
            "move it away, or give lowdim another folder"
        )


def array_problem(path: Path, rows: int | None = None) -> str | None:
    """What is wrong with the ``.npy`` file ``path`` (None when it is whole).

    Only the header is read: a truncated file is shorter than the header says its data are,
    so checking every file of a large folder stays cheap (tens of microseconds a file).
    """
    try:
        with open(path, "rb") as fh:
            version = np.lib.format.read_magic(fh)
            if version == (1, 0):
                shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
            elif version == (2, 0):
                shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
            else:  # a format lowdim does not write: let numpy read it whole
                shape, dtype = np.load(fh, allow_pickle=False).shape, None
            expected = fh.tell() + int(np.prod(shape)) * (dtype.itemsize if dtype else 0)
            size = os.fstat(fh.fileno()).st_size
    except FileNotFoundError:
        return "missing"
    except (OSError, ValueError, EOFError):
        return "damaged (not a whole array file)"
    if size < expected:
        return f"damaged (cut short: {size} of {expected} bytes)"
    if len(shape) < 1 or (rows is not None and shape[0] != rows):
        return f"damaged (shape {shape}, not {rows} rows)"
    return None


def archive_problem(path: Path) -> str | None:
    """What is wrong with the ``.npz`` file ``path`` (None when it is whole; a truncated
    archive loses its directory, which sits at the end)."""
    if not path.is_file():
        return "missing"
    try:
        with zipfile.ZipFile(path) as archive:
            names = archive.namelist()
    except (OSError, zipfile.BadZipFile):
        return "damaged (truncated or not an archive)"
    return None if "rows.npy" in names else "damaged (no rows in the archive)"


def job_file_problems(
    folder: str | Path, job: Mapping, checked: dict[str, str | None] | None = None
) -> list[tuple[str, str]]:
    """The files of one finished job that are missing or damaged: ``(file, problem)`` pairs,
    the file relative to the results folder.

    ``job`` is a row of ``jobs`` (a dict or a Series). Only ``ok`` jobs have files: the
    embedding, the colour file its ``colour`` names, and the per-point quality archive when
    one was written (a job scored without per-point criteria has none). ``checked`` keeps the
    verdicts on colour files, which jobs on the same data share, across calls.
    """
    if job.get("status") != "ok":
        return []
    folder = Path(folder)
    n = job.get("n_samples")
    rows = int(n) if isinstance(n, int | float | np.integer) and n == n else None
    found = []
    name = f"embeddings/{job['job_id']}.npy"
    problem = array_problem(folder / name, rows)
    if problem:
        found.append((name, problem))
    ref = job.get("colour")
    if isinstance(ref, str) and ":" in ref:
        name = f"colours/{ref.partition(':')[2]}.npy"
        checked = {} if checked is None else checked
        if name not in checked:
            checked[name] = array_problem(folder / name, rows)
        if checked[name]:
            found.append((name, checked[name]))
    name = f"quality/{job['job_id']}.npz"
    if (folder / name).exists():
        problem = archive_problem(folder / name)
        if problem:
            found.append((name, problem))
    return found
