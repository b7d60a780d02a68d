"""The results store: one transaction per job, atomic embeddings, what the report needs."""

from __future__ import annotations

import sqlite3

import numpy as np
import pytest

from lowdim.errors import InputError
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
        assert store.record(make_record(job, status="failed", values=[]), replace_ok=True)
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


def test_colours_and_fingerprints_are_kept_for_the_report(tmp_path):
    # What the report needs from the data is stored at job time (the report never reloads a
    # dataset): equal colour vectors share one file, named by their hash.
    colour = ("truth", np.linspace(0.0, 1.0, 5))
    with Store(tmp_path) as store:
        for seed in (0, 1):
            record = make_record(make_job(job_id=str(seed) * 16, seed=seed))
            record.update(data_fingerprint="f" * 20, colour=colour)
            store.record(record)
        rows = store.db.execute("SELECT data_fingerprint, colour FROM jobs").fetchall()
        assert {r[0] for r in rows} == {"f" * 20}
        (ref,) = {r[1] for r in rows}
        assert ref.startswith("truth:")
        np.testing.assert_array_equal(np.load(store.colour_path(ref)), colour[1])
    assert len(list((tmp_path / "colours").glob("*.npy"))) == 1
    assert (store.colour_path(ref).stat().st_mode & 0o777) == 0o644


def test_an_older_store_gains_the_new_columns(tmp_path):
    # A store written before the settings record and the colours existed opens and is
    # extended in place; its rows are kept.
    with sqlite3.connect(tmp_path / "store.sqlite") as con:
        con.executescript(
            "CREATE TABLE jobs (job_id TEXT PRIMARY KEY, dataset TEXT NOT NULL, "
            "dataset_label TEXT NOT NULL, dataset_params TEXT NOT NULL, method TEXT NOT NULL, "
            "method_label TEXT NOT NULL, method_params TEXT NOT NULL, seed INTEGER NOT NULL, "
            "n_components INTEGER NOT NULL, status TEXT NOT NULL, error TEXT, notes TEXT, "
            "fit_seconds REAL, peak_mb REAL, n_samples INTEGER, n_features INTEGER, "
            "sample_size INTEGER, started TEXT, finished TEXT, lowdim_version TEXT NOT NULL, "
            "run_id INTEGER);"
            "CREATE TABLE runs (run_id INTEGER PRIMARY KEY, command TEXT, suite_name TEXT, "
            "suite_path TEXT, suite_text TEXT, environment TEXT, started TEXT, finished TEXT);"
        )
    with Store(tmp_path) as store:
        store.record(make_record(make_job()))
        columns = {r[1] for r in store.db.execute("PRAGMA table_info(jobs)")}
        assert {"data_fingerprint", "colour"} <= columns
        assert "settings" in {r[1] for r in store.db.execute("PRAGMA table_info(runs)")}
        assert store.statuses() == {"a" * 16: "ok"}


def test_runs_and_plan_are_recorded(tmp_path):
    with Store(tmp_path) as store:
        run_id = store.start_run(
            command="lowdim run s.toml",
            suite_name="s",
            suite_path="s.toml",
            suite_text="[suite]",
            environment={"numpy": np.__version__},
            settings='{"selection": "overall"}',
            planned=[("a" * 16, "d", "m", 0), ("b" * 16, "d", "m", 1)],
        )
        store.finish_run(run_id)
        run = store.latest_run()
        assert run["suite_text"] == "[suite]" and run["finished"] is not None
        assert run["settings"] == '{"selection": "overall"}'
        assert [p[0] for p in store.planned(run_id)] == ["a" * 16, "b" * 16]


def test_reading_a_folder_without_store(tmp_path):
    with pytest.raises(FileNotFoundError):
        Store(tmp_path / "none", create=False)
    assert not (tmp_path / "none").exists()


def test_an_ok_job_is_never_replaced_by_a_worse_attempt(tmp_path):
    with Store(tmp_path) as store:
        job = make_job()
        store.record(make_record(job, values=[("trustworthiness", 5, 0.5)]))
        for status in ("failed", "timeout", "memory"):
            assert not store.record(make_record(job, status=status, values=[]))
        assert store.statuses() == {job.job_id: "ok"}
        assert store.db.execute("SELECT value FROM scores").fetchall() == [(0.5,)]
        assert (tmp_path / "embeddings" / f"{job.job_id}.npy").is_file()
        # a failure may replace a failure, and an ok attempt anything
        other = make_job(job_id="b" * 16)
        assert store.record(make_record(other, status="timeout", values=[]))
        assert store.record(make_record(other, status="failed", values=[]))
        assert store.record(make_record(other, values=[("trustworthiness", 5, 0.7)]))
        assert store.statuses()[other.job_id] == "ok"


def test_missing_and_truncated_files_of_finished_jobs_are_named(tmp_path):
    colour = ("truth", np.linspace(0.0, 1.0, 5))
    with Store(tmp_path) as store:
        jobs = [make_job(job_id=str(i) * 16, seed=i) for i in range(3)]
        for job in jobs:
            record = make_record(job)
            record.update(colour=colour, quality=([0, 1, 2, 3, 4], {("qnx", 5): np.ones(5)}))
            store.record(record)
        store.record(make_record(make_job(job_id="f" * 16), status="failed"))
        assert store.damaged() == {}
        (tmp_path / "embeddings" / f"{jobs[0].job_id}.npy").unlink()
        path = tmp_path / "embeddings" / f"{jobs[1].job_id}.npy"
        path.write_bytes(path.read_bytes()[:-8])
        quality = tmp_path / "quality" / f"{jobs[2].job_id}.npz"
        quality.write_bytes(quality.read_bytes()[:40])
        found = store.damaged()
    assert found[jobs[0].job_id] == [(f"embeddings/{jobs[0].job_id}.npy", "missing")]
    ((name, problem),) = found[jobs[1].job_id]
    assert name == f"embeddings/{jobs[1].job_id}.npy" and problem.startswith("damaged")
    ((name, problem),) = found[jobs[2].job_id]
    assert name == f"quality/{jobs[2].job_id}.npz" and problem.startswith("damaged")
    assert set(found) == {j.job_id for j in jobs}


def test_a_damaged_colour_file_is_written_again(tmp_path):
    colour = ("truth", np.linspace(0.0, 1.0, 5))
    with Store(tmp_path) as store:
        record = make_record(make_job())
        record["colour"] = colour
        store.record(record)
        (path,) = (tmp_path / "colours").iterdir()
        path.write_bytes(path.read_bytes()[:60])
        assert store.damaged()
        store.record(record)
        np.testing.assert_array_equal(np.load(path), colour[1])
        assert store.damaged() == {}


@pytest.mark.parametrize(
    "content, words",
    [
        (b"job_id,status\n1,ok\n", "is not an SQLite database"),
        (b"SQLite format 3\x00" + b"\xff" * 200, "is damaged"),
        (None, "without lowdim's tables"),
    ],
)
def test_a_store_that_is_not_lowdims_is_refused_untouched(tmp_path, content, words):
    path = tmp_path / "store.sqlite"
    if content is None:
        db = sqlite3.connect(path)
        db.execute("CREATE TABLE customers (name TEXT)")
        db.commit()
        db.close()
    else:
        path.write_bytes(content)
    before = path.read_bytes()
    for kwargs in ({}, {"read_only": True}, {"create": False}):
        with pytest.raises(InputError, match=words) as caught:
            Store(tmp_path, **kwargs)
        assert str(path) in str(caught.value) and "move it away" in str(caught.value)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["store.sqlite"]
