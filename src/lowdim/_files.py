"""Writing output files atomically: a reader sees the old file or the whole new one, never half.

Every file lowdim writes into a results folder (report, leaderboards, scores, statistics,
figures, embeddings) goes through :func:`atomic_path`: the content is written to a temporary
name in the same folder, flushed to disk, given mode 0644 (readable by a colleague or a web
server whatever the umask of the writing process), and renamed over the final name.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["OUTPUT_MODE", "atomic_path", "write_text", "write_bytes"]

OUTPUT_MODE = 0o644


@contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` atomically.

    The caller writes the whole file to the yielded path (with any library: ``np.save``,
    ``savefig``, ``pyarrow.parquet.write_table``). On leaving the block the file is synced,
    set to mode 0644 and renamed to ``path``; on an exception it is removed and ``path`` is
    left as it was.
    """
    path = Path(path)
    fd, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    temporary = Path(name)
    try:
        yield temporary
        with open(temporary, "rb+") as fh:
            os.fsync(fh.fileno())
        os.chmod(temporary, OUTPUT_MODE)
        os.replace(temporary, path)
    finally:
        temporary.unlink(missing_ok=True)


def write_bytes(path: str | Path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically with mode 0644; return the path."""
    path = Path(path)
    with atomic_path(path) as temporary:
        temporary.write_bytes(data)
    return path


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` (UTF-8, ``\\n`` line ends) to ``path`` atomically with mode 0644."""
    return write_bytes(path, text.encode("utf-8"))
