"""What the command-line tests share: calling ``main`` in process, the one-line error rule,
and reading a results store while a run may still be writing it."""

from __future__ import annotations

import sqlite3
from pathlib import Path

from lowdim.cli import main


def run_cli(args, capsys) -> tuple[int, str, str]:
    """``lowdim ARGS`` in this process: the exit status, standard output and standard error."""
    status = main([str(a) for a in args])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def assert_one_line_error(status: int, err: str, *fragments: str) -> None:
    """A user mistake or an environment problem: exit status 2 and one line, no defect."""
    assert status == 2, err
    assert err.startswith("lowdim: error: ") and err.count("\n") == 1, err
    assert "internal error" not in err and "Traceback" not in err
    for fragment in fragments:
        assert fragment in err, err


def rows(folder: Path, sql: str) -> list[tuple]:
    """Rows of a query on the store in ``folder``, read-only."""
    db = sqlite3.connect(f"file:{folder / 'store.sqlite'}?mode=ro", uri=True)
    try:
        return list(db.execute(sql))
    finally:
        db.close()


def finished(folder: Path) -> int:
    """Jobs in the store so far (0 while the store is still being created)."""
    try:
        return rows(folder, "SELECT COUNT(*) FROM jobs")[0][0]
    except sqlite3.OperationalError:
        return 0
