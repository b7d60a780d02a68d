"""The results store: one SQLite file per results folder, written only by the run's driver.

Crash safety comes from two rules. Each finished job (its ``jobs`` row and all its ``scores``)
is written in one transaction in WAL mode, so a run killed at any moment leaves either the whole
job or none of it. Its embedding is written to a temporary name and renamed into
``embeddings/<job_id>.npy`` *before* that transaction, so a row never points at a missing or
half-written file (a file without a row, left by a kill in between, is overwritten on resume).

Schema (see DEVELOPERS.md; ``notes`` and the ``planned`` table are additions)::

    jobs(job_id PRIMARY KEY, dataset, dataset_label, dataset_params, method, method_label,
         method_params, seed, n_components, status, error, notes, fit_seconds, peak_mb,
         n_samples, n_features, sample_size, started, finished, lowdim_version, run_id)
    scores(job_id, metric, k, value, PRIMARY KEY (job_id, metric, k))
    runs(run_id PRIMARY KEY, command, suite_name, suite_path, suite_text, environment,
         started, finished)
    planned(run_id, job_id, dataset_label, method_label, seed, PRIMARY KEY (run_id, job_id))
"""

from __future__ import annotations

import csv
import json
import os
import sqlite3
from collections.abc import Iterable, Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from lowdim import __version__

__all__ = ["Store", "STORE_NAME", "SCORE_COLUMNS", "STATUSES"]

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
    run_id INTEGER
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
    finished TEXT
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


def _json(value: Any) -> str:
    return json.dumps(value, sort_keys=True, default=str)


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
    """

    def __init__(self, folder: str | Path, *, create: bool = True) -> None:
        self.folder = Path(folder)
        self.path = self.folder / STORE_NAME
        if not create and not self.path.is_file():
            raise FileNotFoundError(2, "no results store in this folder", str(self.path))
        if create:
            self.folder.mkdir(parents=True, exist_ok=True)
        # autocommit mode: transactions are opened explicitly, one per finished job.
        self.db = sqlite3.connect(self.path, isolation_level=None, timeout=30)
        if create:
            self.db.execute("PRAGMA journal_mode=WAL")
            self.db.execute("PRAGMA synchronous=FULL")
            self.db.executescript(_SCHEMA)

    def close(self) -> None:
        self.db.close()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def embeddings(self) -> Path:
        return self.folder / "embeddings"

    def statuses(self) -> dict[str, str]:
        """``job_id -> status`` of every finished job."""
        return dict(self.db.execute("SELECT job_id, status FROM jobs"))

    def start_run(
        self,
        *,
        command: str,
        suite_name: str,
        suite_path: str,
        suite_text: str,
        environment: dict,
        planned: Iterable[tuple[str, str, str, int]] = (),
    ) -> int:
        """Record a run's start and the jobs it plans; return its ``run_id``."""
        db = self.db
        db.execute("BEGIN IMMEDIATE")
        try:
            cur = db.execute(
                "INSERT INTO runs (command, suite_name, suite_path, suite_text, environment, "
                "started) VALUES (?, ?, ?, ?, ?, ?)",
                (command, suite_name, suite_path, suite_text, _json(environment), _now()),
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

    def _write_embedding(self, job_id: str, embedding: np.ndarray) -> None:
        self.embeddings.mkdir(exist_ok=True)
        final = self.embeddings / f"{job_id}.npy"
        temporary = self.embeddings / f".{job_id}.{os.getpid()}.tmp"
        with open(temporary, "wb") as fh:
            np.save(fh, embedding)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temporary, final)

    def record(self, result: dict, run_id: int | None = None) -> None:
        """Write one finished job: its embedding file, then its row and scores in one transaction.

        ``result`` is a record from :func:`lowdim.run.worker.run_job`. Writing a job again
        (``--force``) replaces its row and all its scores.
        """
        job = result["job"]
        ok = result["status"] == "ok" and result.get("embedding") is not None
        if ok:
            self._write_embedding(job.job_id, result["embedding"])
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
        )
        db = self.db
        db.execute("BEGIN IMMEDIATE")
        try:
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

    def score_rows(self) -> Iterator[tuple]:
        """Long-form score rows ``(job_id, dataset, method, seed, metric, k, value)``."""
        yield from self.db.execute(
            "SELECT s.job_id, j.dataset_label, j.method_label, j.seed, s.metric, s.k, s.value "
            "FROM scores s JOIN jobs j USING (job_id) "
            "ORDER BY j.dataset_label, j.method_label, j.seed, s.metric, s.k"
        )

    def export_scores(self) -> list[Path]:
        """Write ``scores.csv`` (and ``scores.parquet`` when pyarrow is installed); return them.

        Values are written with ``repr``, which round-trips every float64 exactly.
        """
        rows = list(self.score_rows())
        written = [self._export_csv(rows)]
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            return written
        written.append(self._export_parquet(rows))
        return written

    def _export_csv(self, rows: list[tuple]) -> Path:
        final = self.folder / "scores.csv"
        temporary = self.folder / f".scores.csv.{os.getpid()}.tmp"
        with open(temporary, "w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(SCORE_COLUMNS)
            for job_id, dataset, method, seed, metric, k, value in rows:
                writer.writerow([job_id, dataset, method, seed, metric, k, repr(float(value))])
        os.replace(temporary, final)
        return final

    def _export_parquet(self, rows: list[tuple]) -> Path:
        import pyarrow as pa
        import pyarrow.parquet as pq

        columns = list(zip(*rows, strict=True)) if rows else [[] for _ in SCORE_COLUMNS]
        types = [pa.string(), pa.string(), pa.string(), pa.int64(), pa.string(), pa.int64()]
        types.append(pa.float64())
        table = pa.table(
            {
                name: pa.array(list(col), type=kind)
                for name, col, kind in zip(SCORE_COLUMNS, columns, types, strict=True)
            }
        )
        final = self.folder / "scores.parquet"
        temporary = self.folder / f".scores.parquet.{os.getpid()}.tmp"
        pq.write_table(table, temporary)
        os.replace(temporary, final)
        return final

    def latest_run(self) -> dict | None:
        """The most recent row of ``runs`` as a dict, or None."""
        cur = self.db.execute("SELECT * FROM runs ORDER BY run_id DESC LIMIT 1")
        row = cur.fetchone()
        if row is None:
            return None
        return dict(zip([c[0] for c in cur.description], row, strict=True))

    def planned(self, run_id: int) -> list[tuple[str, str, str, int]]:
        return list(
            self.db.execute(
                "SELECT job_id, dataset_label, method_label, seed FROM planned WHERE run_id = ?",
                (run_id,),
            )
        )

    def jobs(self) -> list[dict]:
        """Every row of ``jobs`` as a dict."""
        cur = self.db.execute("SELECT * FROM jobs ORDER BY dataset_label, method_label, seed")
        names = [c[0] for c in cur.description]
        return [dict(zip(names, row, strict=True)) for row in cur]

    def headline_means(self, metric: str, k: int) -> dict[tuple[str, str], float]:
        """Mean of ``metric`` at ``k`` over seeds, per (dataset label, method label)."""
        cur = self.db.execute(
            "SELECT j.dataset_label, j.method_label, AVG(s.value) FROM scores s "
            "JOIN jobs j USING (job_id) WHERE s.metric = ? AND s.k = ? AND j.status = 'ok' "
            "GROUP BY j.dataset_label, j.method_label",
            (metric, k),
        )
        return {(d, m): v for d, m, v in cur}

    def integrity(self) -> str:
        return self.db.execute("PRAGMA integrity_check").fetchone()[0]
