"""Published figures a suite sets beside its own: a CSV named by ``[suite] published``.

Columns: ``dataset``, ``method``, ``criterion``, ``value``, ``source``, ``table`` and an
optional ``note`` (e.g. "from memory", or how a published error was turned into an
accuracy). ``dataset`` and ``method`` are the suite's display labels, ``criterion`` a
criterion key (``trustworthiness@12``). The table is read when the suite is loaded and kept in
the run's settings record, so the report sets published and measured side by side without
reading the file again.
"""

from __future__ import annotations

from pathlib import Path

from lowdim.errors import InputError

__all__ = ["PUBLISHED_COLUMNS", "read_published"]

PUBLISHED_COLUMNS = ("dataset", "method", "criterion", "value", "source", "table")


def read_published(path: Path, where: str) -> tuple[dict, ...]:
    """The rows of a published-figures CSV as plain dicts, checked.

    Raises
    ------
    InputError
        For a missing file, a missing column, or a value that is not a number.
    """
    import pandas as pd

    if not path.is_file():
        raise InputError(
            f"{where}: `published` names {str(path)!r}, which is not a file; give the path of "
            "a CSV relative to the suite file"
        )
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    except (ValueError, OSError) as exc:
        raise InputError(
            f"{where}: `published` {str(path)!r} is not a readable CSV: {exc}"
        ) from None
    missing = [c for c in PUBLISHED_COLUMNS if c not in frame.columns]
    if missing:
        raise InputError(
            f"{where}: `published` {str(path)!r} lacks the column(s) {', '.join(missing)}; it "
            f"needs {', '.join(PUBLISHED_COLUMNS)} (and may add note)"
        )
    rows = []
    for i, row in enumerate(frame.to_dict("records"), start=2):
        try:
            value = float(row["value"])
        except ValueError:
            raise InputError(
                f"{where}: `published` {str(path)!r} line {i}: the value {row['value']!r} is not "
                "a number"
            ) from None
        rows.append(
            {
                "dataset": row["dataset"],
                "method": row["method"],
                "criterion": row["criterion"],
                "value": value,
                "source": row["source"],
                "table": row["table"],
                "note": row.get("note", ""),
            }
        )
    return tuple(rows)
