"""Jobs carry file paths and content hashes; where a job runs, the file is checked first."""

from __future__ import annotations

import hashlib
import socket

import numpy as np

from lowdim.run.datafiles import check_data_file, file_sha256
from lowdim.run.suites import suite_from_dict
from lowdim.run.worker import run_job


def file_suite(path) -> dict:
    return {
        "suite": {"name": "f", "neighbors": [5], "metrics": ["trustworthiness"]},
        "datasets": [{"file": str(path)}],
        "methods": [{"name": "pca"}],
    }


def test_the_hash_is_the_sha256_of_the_content(tmp_path):
    path = tmp_path / "points.csv"
    path.write_text("a,b,c\n1,2,3\n")
    # hashlib's sha256 of the same bytes (Python standard library)
    assert file_sha256(path) == hashlib.sha256(b"a,b,c\n1,2,3\n").hexdigest()


def test_a_job_carries_the_path_and_hash_not_the_data(tmp_path):
    path = tmp_path / "points.csv"
    rng = np.random.default_rng(0)
    np.savetxt(path, rng.normal(size=(60, 3)), delimiter=",", header="a,b,c", comments="")
    (job,) = suite_from_dict(file_suite(path), source=str(tmp_path / "s.toml")).jobs()
    assert job.dataset_spec["file"] == str(path)
    assert job.data_sha256 == file_sha256(path)
    assert check_data_file(job.dataset_spec, job.data_sha256, (), "here") is None


def test_a_missing_or_changed_file_fails_the_job_naming_where_and_what(tmp_path):
    path = tmp_path / "points.csv"
    rng = np.random.default_rng(0)
    np.savetxt(path, rng.normal(size=(60, 3)), delimiter=",", header="a,b,c", comments="")
    (job,) = suite_from_dict(file_suite(path), source=str(tmp_path / "s.toml")).jobs()
    path.write_text("a,b,c\n1,2,3\n4,5,7\n")
    record = run_job(job)
    host = socket.gethostname()
    assert record["status"] == "failed"
    assert record["error"].startswith(f"host {host} reads a different data file at {path}")
    path.unlink()
    record = run_job(job)
    assert record["status"] == "failed"
    assert record["error"] == (
        f"host {host} cannot read the data file {path} (No such file or directory); make the "
        "file available at the same path on every worker"
    )
    assert record["embedding"] is None


def test_an_unreadable_plugin_is_named(tmp_path):
    missing = str(tmp_path / "gone.py")
    problem = check_data_file({"name": "swiss_roll"}, None, (missing,), "dask worker tcp://w:1")
    assert problem == (
        f"dask worker tcp://w:1 cannot read the plugin file {missing}; make it readable at that "
        "path"
    )
