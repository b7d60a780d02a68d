"""The results store: one SQLite file per results folder, written only by the run's driver.

Crash safety comes from two rules. Each finished job (its ``jobs`` row and all its ``scores``)
is written in one transaction in WAL mode, so a run killed at any moment leaves either the whole
job or none of it. Its embedding is written to a temporary name and renamed into
``embeddings/<job_id>.npy`` *before* that transaction, so a row never points at a missing or
half-written file (a file without a row, left by a kill in between, is overwritten on resume).

What the report needs from the data is stored at job time, so a report never regenerates a
dataset: ``data_fingerprint`` (a hash of the job's data matrix; equal fingerprints mean the
same points, which is what seed stability needs) and ``colour`` (``"<kind>:<hash>"`` naming
``colours/<hash>.npy``, the values that colour the job's points in the gallery: the first
intrinsic coordinate, the class labels, or the first principal component).

Records only improve: a job that finished ``ok`` keeps its row, scores and embedding when a
later attempt fails, unless the caller says so (``--force``). Files can still be lost or damaged
outside lowdim (a deleted or truncated embedding): :func:`job_file_problems` names them, the
runner then reruns the job and the report says which file is missing. A ``store.sqlite`` that is
not an SQLite database, or one without lowdim's tables, is refused in one line by
:func:`check_store_file` before anything is written.

Schema (see DEVELOPERS.md; ``notes``, the fingerprint, the colour, the run's ``settings``
record and the ``planned`` table are additions)::

    jobs(job_id PRIMARY KEY, dataset, dataset_label, dataset_params, method, method_label,
         method_params, seed, n_components, status, error, notes, fit_seconds, peak_mb,
         n_samples, n_features, sample_size, started, finished, lowdim_version, run_id,
         data_fingerprint, colour, score_seconds, diagnoses)
    scores(job_id, metric, k, value, PRIMARY KEY (job_id, metric, k))
    runs(run_id PRIMARY KEY, command, suite_name, suite_path, suite_text, environment,
         started, finished, settings, kind)
    planned(run_id, job_id, dataset_label, method_label, seed, PRIMARY KEY (run_id, job_id))
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import sqlite3
from collections.abc import Iterable, Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from lowdim import __version__
from lowdim._files import atomic_path
from lowdim.run.store_checks import (
    array_problem,
    check_store_file,
    damaged_store,
    is_damage,
    job_file_problems,
)

__all__ = [
    "Store",
    "STORE_NAME",
    "SCORE_COLUMNS",
    "STATUSES",
    "colour_ref",
    "check_store_file",
    "job_file_problems",
]

STORE_NAME = "store.sqlite"
STATUSES = ("ok", "failed", "timeout", "memory")
SCORE_COLUMNS = ("job_id", "dataset", "method", "seed", "metric", "k", "value")

_JOB_COLUMNS = (
    "job_id",
    "dataset",
    "dataset_label",
    "dataset_params",
    "method",
    "method_label",
    "method_params",
    "seed",
    "n_components",
    "status",
    "error",
    "notes",
    "fit_seconds",
    "peak_mb",
    "n_samples",
    "n_features",
    "sample_size",
    "started",
    "finished",
    "lowdim_version",
    "run_id",
    "data_fingerprint",
    "colour",
    "score_seconds",
    "diagnoses",
)
_SCHEMA = """
CREATE TABLE IF NOT EXISTS jobs (
    job_id TEXT PRIMARY KEY,
    dataset TEXT NOT NULL,
    dataset_label TEXT NOT NULL,
    dataset_params TEXT NOT NULL,
    method TEXT NOT NULL,
    method_label TEXT NOT NULL,
    method_params TEXT NOT NULL,
    seed INTEGER NOT NULL,
    n_components INTEGER NOT NULL,
    status TEXT NOT NULL CHECK (status IN ('ok', 'failed', 'timeout', 'memory')),
    error TEXT,
    notes TEXT,
    fit_seconds REAL,
    peak_mb REAL,
    n_samples INTEGER,
    n_features INTEGER,
    sample_size INTEGER,
    started TEXT,
    finished TEXT,
    lowdim_version TEXT NOT NULL,
    run_id INTEGER,
    data_fingerprint TEXT,
    colour TEXT,
    score_seconds REAL,
    diagnoses TEXT
);
CREATE TABLE IF NOT EXISTS scores (
    job_id TEXT NOT NULL,
    metric TEXT NOT NULL,
    k INTEGER NOT NULL,
    value REAL,
    PRIMARY KEY (job_id, metric, k)
);
CREATE TABLE IF NOT EXISTS runs (
    run_id INTEGER PRIMARY KEY,
    command TEXT,
    suite_name TEXT,
    suite_path TEXT,
    suite_text TEXT,
    environment TEXT,
    started TEXT,
    finished TEXT,
    settings TEXT,
    kind TEXT
);
CREATE TABLE IF NOT EXISTS planned (
    run_id INTEGER NOT NULL,
    job_id TEXT NOT NULL,
    dataset_label TEXT NOT NULL,
    method_label TEXT NOT NULL,
    seed INTEGER NOT NULL,
    PRIMARY KEY (run_id, job_id)
);
"""


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="milliseconds")


# Columns added after the first stores were written: an older store gains them on opening.
_ADDED_COLUMNS = {
    "jobs": (
        ("data_fingerprint", "TEXT"),
        ("colour", "TEXT"),
        ("score_seconds", "REAL"),
        ("diagnoses", "TEXT"),
    ),
    "runs": (("settings", "TEXT"), ("kind", "TEXT")),
}


def _json(value: Any) -> str:
    return json.dumps(value, sort_keys=True, default=str)


def colour_ref(kind: str, values: np.ndarray) -> str:
    """``"<kind>:<hash>"`` for a colour vector: equal vectors share one file."""
    digest = hashlib.sha256(np.ascontiguousarray(values).tobytes())
    digest.update(str(values.dtype).encode())
    return f"{kind}:{digest.hexdigest()[:20]}"


class Store:
    """The SQLite store of one results folder.

    Parameters
    ----------
    folder : path
        The results folder; the database is ``folder/store.sqlite`` and embeddings go to
        ``folder/embeddings/``.
    create : bool, default=True
        Create the folder and the schema when missing; with False a missing store raises
        FileNotFoundError (for read-only commands such as ``lowdim status``).
    read_only : bool, default=False
        Open the database read-only (the analysis engine's reader); a missing store raises
        FileNotFoundError.
    """

    def __init__(
        self, folder: str | Path, *, create: bool = True, read_only: bool = False
    ) -> None:
        self.folder = Path(folder)
        self.path = self.folder / STORE_NAME
        if (read_only or not create) and not self.path.is_file():
            raise FileNotFoundError(2, "no results store in this folder", str(self.path))
        if self.path.exists():
            check_store_file(self.path)
        if read_only:
            self.db = sqlite3.connect(f"{self.path.resolve().as_uri()}?mode=ro", uri=True)
            return
        if create:
            self.folder.mkdir(parents=True, exist_ok=True)
        # autocommit mode: transactions are opened explicitly, one per finished job.
        self.db = sqlite3.connect(self.path, isolation_level=None, timeout=30)
        if create:
            with self._guard():
                self.db.execute("PRAGMA journal_mode=WAL")
                self.db.execute("PRAGMA synchronous=FULL")
                self.db.executescript(_SCHEMA)
                self._add_missing_columns()

    @contextlib.contextmanager
    def _guard(self) -> Iterator[None]:
        """Turn SQLite's word for a damaged file into one line naming it and what to do."""
        try:
            yield
        except sqlite3.DatabaseError as exc:
            if is_damage(exc):
                raise damaged_store(self.path, exc) from None
            raise

    def _rows(self, sql: str, params: tuple = ()) -> tuple[list[str], list[tuple]]:
        """Column names and every row of a query, read whole inside the damage guard."""
        with self._guard():
            cur = self.db.execute(sql, params)
            rows = cur.fetchall()
        return [c[0] for c in cur.description or ()], rows

    def _add_missing_columns(self) -> None:
        for table, columns in _ADDED_COLUMNS.items():
            have = {row[1] for row in self.db.execute(f"PRAGMA table_info({table})")}
            for name, kind in columns:
                if name not in have:
                    self.db.execute(f"ALTER TABLE {table} ADD COLUMN {name} {kind}")

    def close(self) -> None:
        self.db.close()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def embeddings(self) -> Path:
        return self.folder / "embeddings"

    @property
    def colours(self) -> Path:
        return self.folder / "colours"

    @property
    def quality(self) -> Path:
        """Per-point quality of each job, ``quality/<job_id>.npz``: ``rows`` and one array
        per ``"metric@K"`` (Q_NX, trustworthiness and continuity terms)."""
        return self.folder / "quality"

    def colour_path(self, ref: str) -> Path:
        """The file of a job's ``colour`` reference."""
        return self.colours / f"{ref.partition(':')[2]}.npy"

    def statuses(self) -> dict[str, str]:
        """``job_id -> status`` of every finished job."""
        return dict(self._rows("SELECT job_id, status FROM jobs")[1])

    def damaged(self) -> dict[str, list[tuple[str, str]]]:
        """``job_id -> [(file, problem), ...]`` for each ``ok`` job whose files are missing or
        damaged (see :func:`job_file_problems`)."""
        found, checked = {}, {}
        for job in self.jobs():
            problems = job_file_problems(self.folder, job, checked)
            if problems:
                found[job["job_id"]] = problems
        return found

    def start_run(
        self,
        *,
        command: str,
        suite_name: str,
        suite_path: str,
        suite_text: str,
        environment: dict,
        settings: str,
        planned: Iterable[tuple[str, str, str, int]] = (),
        kind: str = "suite",
    ) -> int:
        """Record a run's start, its settings record (JSON) and the jobs it plans; return its
        ``run_id``. ``kind`` is ``"suite"``, or ``"confirmation"`` for the whole-file run that
        follows a comparison (its verdict stays the main run's)."""
        db = self.db
        with self._guard():
            db.execute("BEGIN IMMEDIATE")
            try:
                cur = db.execute(
                    "INSERT INTO runs (command, suite_name, suite_path, suite_text, environment, "
                    "started, settings, kind) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (
                        command,
                        suite_name,
                        suite_path,
                        suite_text,
                        _json(environment),
                        _now(),
                        settings,
                        kind,
                    ),
                )
                run_id = int(cur.lastrowid)
                db.executemany(
                    "INSERT OR REPLACE INTO planned VALUES (?, ?, ?, ?, ?)",
                    [(run_id, *row) for row in planned],
                )
                db.execute("COMMIT")
            except BaseException:
                db.execute("ROLLBACK")
                raise
        return run_id

    def finish_run(self, run_id: int) -> None:
        self.db.execute("UPDATE runs SET finished = ? WHERE run_id = ?", (_now(), run_id))

    def _write_array(self, path: Path, values: np.ndarray) -> None:
        path.parent.mkdir(exist_ok=True)
        with atomic_path(path) as temporary, open(temporary, "wb") as fh:
            np.save(fh, values)

    def record(self, result: dict, run_id: int | None = None, *, replace_ok: bool = False) -> bool:
        """Write one finished job: its embedding file, then its row and scores in one transaction.

        ``result`` is a record from :func:`lowdim.run.worker.run_job`. Writing a job again
        replaces its row and all its scores, except that a job recorded ``ok`` is never
        replaced by an attempt that was not, unless ``replace_ok`` (``--force``): its row, its
        scores and its embedding stay. Return whether the record was written.
        """
        job = result["job"]
        ok = result["status"] == "ok" and result.get("embedding") is not None
        if not ok and not replace_ok and self._is_ok(job.job_id):
            return False
        if ok:
            self._write_array(self.embeddings / f"{job.job_id}.npy", result["embedding"])
        if ok and result.get("quality") is not None:
            rows, values = result["quality"]
            arrays = {f"{m}@{k}": np.asarray(v) for (m, k), v in values.items()}
            self.quality.mkdir(exist_ok=True)
            with atomic_path(self.quality / f"{job.job_id}.npz") as temporary:
                with open(temporary, "wb") as fh:
                    np.savez(fh, rows=np.asarray(rows), **arrays)
        colour = None
        if result.get("colour") is not None:
            kind, values = result["colour"]
            colour = colour_ref(kind, values)
            if array_problem(self.colour_path(colour), len(values)) is not None:
                self._write_array(self.colour_path(colour), values)
        row = (
            job.job_id,
            job.dataset_target,
            job.dataset_label,
            _json(job.dataset_spec),
            job.method_target,
            job.method_label,
            _json(job.method_params),
            job.seed,
            job.n_components,
            result["status"],
            result.get("error"),
            "; ".join(result.get("notes") or []) or None,
            result.get("fit_seconds"),
            result.get("peak_mb"),
            result.get("n_samples"),
            result.get("n_features"),
            result.get("sample_size"),
            result.get("started"),
            result.get("finished"),
            __version__,
            run_id,
            result.get("data_fingerprint"),
            colour,
            result.get("score_seconds"),
            None if result.get("diagnoses") is None else _json(result["diagnoses"]),
        )
        db = self.db
        with self._guard():
            db.execute("BEGIN IMMEDIATE")
            try:
                # checked again inside the transaction: nothing can turn the job ok meanwhile
                if not ok and not replace_ok and self._is_ok(job.job_id):
                    db.execute("ROLLBACK")
                    return False
                db.execute("DELETE FROM scores WHERE job_id = ?", (job.job_id,))
                db.execute(
                    f"INSERT OR REPLACE INTO jobs ({', '.join(_JOB_COLUMNS)}) "
                    f"VALUES ({', '.join('?' * len(row))})",
                    row,
                )
                db.executemany(
                    "INSERT OR REPLACE INTO scores VALUES (?, ?, ?, ?)",
                    [(job.job_id, m, int(k), float(v)) for m, k, v in result.get("values", [])],
                )
                db.execute("COMMIT")
            except BaseException:
                db.execute("ROLLBACK")
                raise
        if not ok:
            (self.embeddings / f"{job.job_id}.npy").unlink(missing_ok=True)
        return True

    def _is_ok(self, job_id: str) -> bool:
        row = self.db.execute("SELECT status FROM jobs WHERE job_id = ?", (job_id,)).fetchone()
        return row is not None and row[0] == "ok"

    def score_rows(self) -> Iterator[tuple]:
        """Long-form score rows ``(job_id, dataset, method, seed, metric, k, value)``."""
        yield from self._rows(
            "SELECT s.job_id, j.dataset_label, j.method_label, j.seed, s.metric, s.k, s.value "
            "FROM scores s JOIN jobs j USING (job_id) "
            "ORDER BY j.dataset_label, j.method_label, j.seed, s.metric, s.k"
        )[1]

    def latest_run(self) -> dict | None:
        """The most recent row of ``runs`` as a dict, or None."""
        names, rows = self._rows("SELECT * FROM runs ORDER BY run_id DESC LIMIT 1")
        return dict(zip(names, rows[0], strict=True)) if rows else None

    def planned(self, run_id: int) -> list[tuple[str, str, str, int]]:
        return self._rows(
            "SELECT job_id, dataset_label, method_label, seed FROM planned WHERE run_id = ?",
            (run_id,),
        )[1]

    def jobs(self) -> list[dict]:
        """Every row of ``jobs`` as a dict."""
        names, rows = self._rows("SELECT * FROM jobs ORDER BY dataset_label, method_label, seed")
        return [dict(zip(names, row, strict=True)) for row in rows]

    def table(self, name: str) -> tuple[list[str], list[tuple]]:
        """Column names and rows of one of the store's tables (empty when it is absent)."""
        _, exists = self._rows(
            "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?", (name,)
        )
        if not exists:
            return [], []
        return self._rows(f"SELECT * FROM {name}")

    def integrity(self) -> str:
        return self.db.execute("PRAGMA integrity_check").fetchone()[0]
