"""Check, where a job runs, that the files it names are there and are the driver's files.

Jobs travel to workers as dataset specs (generator parameters, or a file path with the sha256
the driver computed when it read the suite), never as arrays. A worker on another machine may
not see the driver's files, or may see another version of them; it then fails the job with one
line naming itself and the path, instead of a traceback from deep inside a reader.
"""

from __future__ import annotations

import functools
import hashlib
import os
import socket
from collections.abc import Iterable
from pathlib import Path

__all__ = ["check_data_file", "where_am_i", "dask_worker_address", "file_sha256"]


def dask_worker_address() -> str | None:
    """The address of the dask worker running this code, or None outside a dask worker."""
    try:
        from distributed import get_worker

        return get_worker().address
    except (ImportError, ValueError):
        return None


def where_am_i() -> str:
    """This process as a person would name it: the dask worker's address, or the host."""
    host = socket.gethostname()
    address = dask_worker_address()
    return f"host {host}" if address is None else f"dask worker {address} on {host}"


@functools.lru_cache(maxsize=64)
def _hash(path: str, size: int, mtime_ns: int) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def file_sha256(path: str | Path) -> str:
    """The sha256 of a file's content, computed once per (path, size, modification time)."""
    stat = os.stat(path)
    return _hash(str(path), stat.st_size, stat.st_mtime_ns)


def check_data_file(
    spec: dict, sha256: str | None, plugins: Iterable[str], where: str
) -> str | None:
    """The reason this process cannot run a job on ``spec``, or None when it can.

    Checks that the dataset's file (if any) and every plugin file can be read here, and that
    the dataset's content hash is ``sha256``, the one the driver computed.
    """
    for path in plugins:
        if not os.access(path, os.R_OK):
            return f"{where} cannot read the plugin file {path}; make it readable at that path"
    path = spec.get("file")
    if path is None:
        return None
    try:
        found = file_sha256(path)
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        return (
            f"{where} cannot read the data file {path} ({reason}); make the file available "
            "at the same path on every worker"
        )
    if sha256 is not None and found != sha256:
        return (
            f"{where} reads a different data file at {path} (sha256 {found[:12]}..., the "
            f"suite's is {sha256[:12]}...); give every worker the same file"
        )
    return None
