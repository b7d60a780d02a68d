"""A first look at a data file without reading its values: can it be read, what it is called.

:func:`check_readable` turns the environment's answers (no such file, a folder, a symbolic
link that loops or leads nowhere, no permission) into one worded line. :func:`text_header`
finds a CSV / TSV file's delimiter and header from its first 64 KB, and refuses a header that
names two columns alike. :func:`outline` gives a file's column names (or an array's column
count and the keys of an archive) and an estimate of its row count from the header and the
metadata alone: the suite check uses it to test `labels`, `features` and `drop` and to
estimate memory before any job runs.
"""

from __future__ import annotations

import codecs
import csv
import errno
import importlib.util
import os
import stat
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from lowdim.datasets.checks import check_unique_names
from lowdim.errors import InputError

__all__ = [
    "Outline",
    "check_readable",
    "text_header",
    "numbered_columns",
    "parquet_columns",
    "outline",
]

SAMPLE_BYTES = 1 << 16
_DELIMITERS = ",\t;|"


@dataclass(frozen=True)
class Outline:
    """What a data file holds, as far as its header and metadata tell.

    ``columns`` are the names of a table's columns (None for an array); ``n_columns`` counts
    them; ``n_rows`` is the number of data rows (for text files a rough count: the lines less
    the header, blank lines included); ``keys`` lists an ``.npz`` archive's arrays. A count
    the header does not give is None.
    """

    columns: list[str] | None
    n_columns: int | None
    n_rows: int | None
    keys: list[str] | None = None


def check_readable(path: str | Path, where: str) -> Path:
    """Return ``path`` if it names a readable file, else raise a worded error.

    A missing file raises ``FileNotFoundError`` (the caller's own wording may come first); a
    folder, a symbolic link that loops or leads nowhere, and a file or folder the user may not
    read raise :class:`~lowdim.errors.InputError`.
    """
    path = Path(path).expanduser()
    try:
        info = os.stat(path)
    except FileNotFoundError:
        if os.path.islink(path):
            raise InputError(
                f"{where} is a symbolic link to {os.readlink(path)!r}, which does not exist; "
                "point the link at a real file"
            ) from None
        raise FileNotFoundError(errno.ENOENT, "no such data file", str(path)) from None
    except PermissionError:
        raise InputError(
            f"{where} cannot be reached: permission denied on a folder of its path; make the "
            "folder readable or copy the file somewhere you can read"
        ) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(
                f"{where} is a symbolic link that leads back to itself (a symlink loop); point "
                "it at a real file"
            ) from None
        if exc.errno == errno.ENOTDIR:
            raise InputError(f"{where}: a part of the path is a file, not a folder") from None
        raise
    if stat.S_ISDIR(info.st_mode):
        raise InputError(f"{where} is a folder, not a file; name a file inside it")
    if not stat.S_ISREG(info.st_mode):
        raise InputError(
            f"{where} is not a regular file (a device or a pipe); save the data to a file first"
        )
    try:
        with open(path, "rb"):
            pass
    except PermissionError:
        raise InputError(
            f"{where} cannot be read: permission denied; make it readable (chmod u+r) or copy "
            "it somewhere you can read"
        ) from None
    return path


def not_utf8(where: str, exc: UnicodeDecodeError) -> str:
    """The message for a text file that is not UTF-8."""
    return (
        f"{where} is not UTF-8 text (byte 0x{exc.object[exc.start]:02x} at byte offset "
        f"{exc.start} cannot be decoded); save it as UTF-8"
    )


def _text_sample(path: Path, where: str) -> str:
    with open(path, "rb") as fh:
        raw = fh.read(SAMPLE_BYTES)
    if not raw.strip():
        raise InputError(f"{where} is empty; give a file with a header line and data rows")
    if b"\x00" in raw:
        raise InputError(
            f"{where} looks like a binary file, not CSV/TSV text; export it as text, or use "
            "a .npy, .npz or .parquet extension if it is one of those"
        )
    try:
        # The incremental decoder does not fail on a character cut at the end of the sample.
        text = codecs.getincrementaldecoder("utf-8")().decode(raw, final=False)
    except UnicodeDecodeError as exc:
        raise InputError(not_utf8(where, exc)) from None
    return text.lstrip("\ufeff")


def _detect_delimiter(lines: list[str], kind: str) -> str:
    preferred = "\t" if kind == "tsv" else ","
    counts = {line.count(preferred) for line in lines}
    if len(counts) == 1 and counts != {0}:
        return preferred
    try:
        return csv.Sniffer().sniff("\n".join(lines), delimiters=_DELIMITERS).delimiter
    except csv.Error:
        return preferred  # one column, or no consistent delimiter: the parser will say so


def _is_number(field: str) -> bool:
    try:
        float(field)
    except ValueError:
        return False
    return True


def text_header(
    path: Path, kind: str, where: str, delimiter: str | None = None
) -> tuple[str, list[str] | None]:
    """The delimiter and the header's column names (None when the first line is all numbers).

    Raises InputError for an empty, binary or non-UTF-8 file and for duplicated names.
    """
    text = _text_sample(path, where)
    lines = [line for line in text.splitlines() if line.strip()]
    if len(text.encode("utf-8")) >= SAMPLE_BYTES - 4 and len(lines) > 1:
        lines = lines[:-1]  # the last line of a cut sample may be incomplete
    lines = lines[:200]
    sep = delimiter or _detect_delimiter(lines, kind)
    first = next(csv.reader([lines[0]], delimiter=sep))
    if all(_is_number(field) for field in first):
        return sep, None
    check_unique_names(first, where)
    return sep, first


def parquet_columns(path: Path, where: str) -> tuple[list[str], int]:
    """A Parquet file's column names and row count, from its footer (no values read)."""
    if importlib.util.find_spec("pyarrow") is None:
        raise InputError(
            f"reading {where} needs pyarrow, which is not installed; install it with "
            "`pip install 'lowdim[parquet]'` or convert the file to CSV"
        )
    import pyarrow.parquet as pq

    try:
        footer = pq.ParquetFile(path)
        names = [str(name) for name in footer.schema_arrow.names]
        n_rows = int(footer.metadata.num_rows)
    except Exception as exc:  # pyarrow raises its own error types for a bad file
        raise InputError(
            f"{where} could not be read as Parquet ({type(exc).__name__}: "
            f"{' '.join(str(exc).split())}); check that it is a Parquet file"
        ) from None
    check_unique_names(names, where)
    return names, n_rows


def numbered_columns(count: int) -> list[str]:
    """The names a header-less table's columns get: ``column_1``, ``column_2``, ..."""
    return [f"column_{i + 1}" for i in range(count)]


def _count_lines(path: Path) -> int:
    count, last = 0, b"\n"
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            count += block.count(b"\n")
            last = block[-1:]
    return count + (last != b"\n")


def _array_shape(handle, where: str) -> tuple[int, ...] | None:
    """The shape in a ``.npy`` header (None for a format version this reader does not know)."""
    fmt = np.lib.format
    try:
        version = fmt.read_magic(handle)
        if version == (1, 0):
            shape = fmt.read_array_header_1_0(handle)[0]
        elif version == (2, 0):
            shape = fmt.read_array_header_2_0(handle)[0]
        else:
            return None
    except (ValueError, OSError, EOFError) as exc:
        raise InputError(
            f"{where} is not a readable numpy array ({' '.join(str(exc).split())})"
        ) from None
    return tuple(shape)


def _table_shape(shape: tuple[int, ...] | None, where: str) -> tuple[int | None, int | None]:
    if shape is None:
        return None, None
    if len(shape) != 2:
        raise InputError(
            f"{where} holds a {len(shape)}-D array of shape {shape}; save a 2-D array (rows = "
            "samples, columns = features)"
        )
    return int(shape[0]), int(shape[1])


def outline(path: str | Path, kind: str, where: str, delimiter: str | None = None) -> Outline:
    """Column names (or count) and row count of the data file at ``path``, cheaply.

    ``kind`` is the format from :func:`lowdim.datasets.files.file_format`. Text files are
    sampled for their header and counted line by line; Parquet files read their footer;
    ``.npy`` and ``.npz`` files their array headers.
    """
    path = check_readable(path, where)
    if kind == "parquet":
        names, n_rows = parquet_columns(path, where)
        return Outline(names, len(names), n_rows)
    if kind == "npy":
        with open(path, "rb") as fh:
            n_rows, n_columns = _table_shape(_array_shape(fh, where), where)
        return Outline(None, n_columns, n_rows)
    if kind == "npz":
        try:
            archive = zipfile.ZipFile(path)
        except (zipfile.BadZipFile, OSError) as exc:
            raise InputError(f"{where} is not a readable .npz archive ({exc})") from None
        with archive:
            keys = [name.removesuffix(".npy") for name in archive.namelist()]
            if "X" not in keys:
                raise InputError(
                    f"{where} has no array 'X' (its keys are {', '.join(map(repr, keys))}); "
                    "save the data as numpy.savez(path, X=..., labels=..., truth=...)"
                )
            with archive.open("X.npy") as fh:
                n_rows, n_columns = _table_shape(_array_shape(fh, f"{where}, array 'X'"), where)
        return Outline(None, n_columns, n_rows, keys)
    sep, names = text_header(path, kind, where, delimiter)
    lines = _count_lines(path)
    if names is None:
        with open(path, encoding="utf-8-sig", errors="replace") as fh:
            first = next(csv.reader([fh.readline()], delimiter=sep))
        return Outline(numbered_columns(len(first)), len(first), lines)
    return Outline(names, len(names), max(lines - 1, 0))
