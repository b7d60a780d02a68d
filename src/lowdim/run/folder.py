"""Results folders lowdim owns: the marker written at creation, and who may write there.

lowdim replaces its outputs (report.html, the leaderboards, ``figures/*.png``) whenever it
rebuilds a folder, so it writes only into folders it created or recognises: a folder that does
not exist yet or is empty (created, and marked), one holding the marker file
:data:`MARKER` (JSON: the lowdim version and the creation time), or one holding a
``store.sqlite`` of lowdim's own from before the marker existed (adopted: the marker is
written). Any other non-empty folder is refused in one line, before anything is written.

:func:`results_folder` claims a folder and holds its one-writer lock (:mod:`lowdim.run.lock`)
for as long as a command writes into it.
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import datetime
from pathlib import Path

from lowdim import __version__
from lowdim._files import write_text
from lowdim.errors import InputError
from lowdim.run.lock import folder_lock
from lowdim.run.store import STORE_NAME, check_store_file

__all__ = ["MARKER", "check_results_folder", "claim_results_folder", "results_folder"]

MARKER = ".lowdim-results"
_OWN_PREFIX = ".lowdim-"  # the marker, the lock, and their temporary names while written


def _entries(path: Path) -> list[str]:
    return sorted(name for name in os.listdir(path) if not name.startswith(_OWN_PREFIX))


def check_results_folder(path: str | Path, option: str = "--out") -> Path:
    """Return ``path`` if lowdim may write its results there; write nothing.

    Raises
    ------
    InputError
        When ``path`` is a non-empty folder with neither the marker nor a results store of
        lowdim's, or holds a ``store.sqlite`` that is not lowdim's (see
        :func:`lowdim.run.store.check_store_file`).
    """
    path = Path(path)
    if not path.is_dir():
        return path
    store = path / STORE_NAME
    if store.is_file():
        check_store_file(store)
        return path
    if (path / MARKER).is_file():
        return path
    entries = _entries(path)
    if not entries:
        return path
    what = repr(entries[0])
    if len(entries) > 1:
        what += f" and {len(entries) - 1} other entr{'ies' if len(entries) > 2 else 'y'}"
    raise InputError(
        f"{option} {str(path)!r} holds files lowdim did not write ({what}) and no {MARKER} "
        "marker, and lowdim replaces its outputs in its folders; give a new or empty folder, "
        "or the folder of an earlier lowdim run"
    )


def claim_results_folder(path: str | Path, option: str = "--out") -> Path:
    """Check ``path`` (:func:`check_results_folder`), create it if missing and write the
    marker if it has none; return it."""
    path = check_results_folder(path, option)
    path.mkdir(parents=True, exist_ok=True)
    if not (path / MARKER).is_file():
        stamp = datetime.now().astimezone().isoformat(timespec="seconds")
        write_text(path / MARKER, json.dumps({"lowdim": __version__, "created": stamp}) + "\n")
    return path


@contextmanager
def results_folder(
    path: str | Path, *, wait: bool = False, command: str = "lowdim", option: str = "--out"
) -> Iterator[Path]:
    """Claim the results folder ``path`` and hold its one-writer lock while the block runs.

    Raises
    ------
    InputError
        When lowdim may not write there (:func:`check_results_folder`).
    lowdim.run.lock.FolderBusy
        When another run writes there and ``wait`` is False.
    """
    path = claim_results_folder(path, option)
    with folder_lock(path, wait=wait, command=command):
        yield path
