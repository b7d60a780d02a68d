"""The results store: one transaction per job, atomic embeddings, exact exports."""

from __future__ import annotations

import csv
import sqlite3

import numpy as np
import pytest

from lowdim.run.store import Store
from lowdim.run.suites import Job


def make_job(job_id="a" * 16, method="pca", seed=0):
    return Job(
        job_id=job_id,
        dataset_spec={"name": "swiss_roll", "n": 100, "seed": seed},
        dataset_label="swiss_roll(n=100)",
        method_spec={"name": method, "n_neighbors": 5},
        method_label=method,
        seed=seed,
        n_components=2,
        neighbors=(5, 10),
        metrics=None,
        timeout=10.0,
        memory_limit=None,
    )


def make_record(job, status="ok", values=None, embedding=True):
    return {
        "job": job,
        "status": status,
        "error": None if status == "ok" else "ValueError: bad",
        "embedding": np.arange(10.0).reshape(5, 2) if embedding and status == "ok" else None,
        "values": values if values is not None else [("trustworthiness", 5, 0.1 + 0.2)],
        "notes": ["continuity skipped"],
        "sample_size": None,
        "fit_seconds": 0.5,
        "peak_mb": 3.0,
        "n_samples": 5,
        "n_features": 3,
        "started": "s",
        "finished": "f",
    }


def test_record_writes_row_scores_and_embedding(tmp_path):
    with Store(tmp_path) as store:
        job = make_job()
        store.record(make_record(job), run_id=1)
        assert store.statuses() == {job.job_id: "ok"}
        (row,) = store.jobs()
        assert row["method_params"] == '{"n_neighbors": 5}'
        assert row["notes"] == "continuity skipped"
        assert row["dataset"] == "swiss_roll" and row["method"] == "pca"
        np.testing.assert_array_equal(
            np.load(tmp_path / "embeddings" / f"{job.job_id}.npy"), np.arange(10.0).reshape(5, 2)
        )
        assert not [p for p in (tmp_path / "embeddings").iterdir() if p.suffix != ".npy"]
        assert store.db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert store.integrity() == "ok"


def test_rewriting_a_job_replaces_row_and_scores(tmp_path):
    with Store(tmp_path) as store:
        job = make_job()
        store.record(make_record(job, values=[("trustworthiness", 5, 0.5), ("stress", 0, 1.0)]))
        store.record(make_record(job, status="failed", values=[]))
        assert store.statuses() == {job.job_id: "failed"}
        assert store.db.execute("SELECT COUNT(*) FROM scores").fetchone()[0] == 0
        # a failed job keeps no embedding from an earlier success
        assert not (tmp_path / "embeddings" / f"{job.job_id}.npy").exists()


def test_a_failing_write_leaves_nothing_of_the_job(tmp_path):
    with Store(tmp_path) as store:
        bad = make_record(make_job(), status="exploded")  # violates the status CHECK
        with pytest.raises(sqlite3.IntegrityError):
            store.record(bad)
        assert store.statuses() == {}
        assert store.db.execute("SELECT COUNT(*) FROM scores").fetchone()[0] == 0


def test_scores_csv_keeps_full_precision(tmp_path):
    values = [("trustworthiness", 5, 0.1 + 0.2), ("stress", 0, 1 / 3), ("rnx", 10, -1e-300)]
    with Store(tmp_path) as store:
        store.record(make_record(make_job(), values=values))
        paths = store.export_scores()
    with open(tmp_path / "scores.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["job_id", "dataset", "method", "seed", "metric", "k", "value"]
    got = {(r["metric"], int(r["k"])): float(r["value"]) for r in rows}
    # repr round-trips every float64 exactly (Python language reference, float.__repr__)
    assert got == {(m, k): v for m, k, v in values}
    assert rows[0]["dataset"] == "swiss_roll(n=100)" and rows[0]["method"] == "pca"
    pq = pytest.importorskip("pyarrow.parquet")
    assert tmp_path / "scores.parquet" in paths
    table = pq.read_table(tmp_path / "scores.parquet").to_pydict()
    assert sorted(table["value"]) == sorted(v for _, _, v in values)


def test_runs_and_plan_are_recorded(tmp_path):
    with Store(tmp_path) as store:
        run_id = store.start_run(
            command="lowdim run s.toml",
            suite_name="s",
            suite_path="s.toml",
            suite_text="[suite]",
            environment={"numpy": np.__version__},
            planned=[("a" * 16, "d", "m", 0), ("b" * 16, "d", "m", 1)],
        )
        store.finish_run(run_id)
        run = store.latest_run()
        assert run["suite_text"] == "[suite]" and run["finished"] is not None
        assert [p[0] for p in store.planned(run_id)] == ["a" * 16, "b" * 16]


def test_reading_a_folder_without_store(tmp_path):
    with pytest.raises(FileNotFoundError):
        Store(tmp_path / "none", create=False)
    assert not (tmp_path / "none").exists()
