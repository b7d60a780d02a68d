"""The runner: limits in a child process, statuses, caching, retry and force, the summary."""

from __future__ import annotations

import faulthandler
import os
import time

import numpy as np
import pytest
from run_fakes import install_fake_metrics, write_plugin

from lowdim.methods import load_plugin
from lowdim.run import limits as _limits
from lowdim.run.limits import run_limited
from lowdim.run.runner import run_suite
from lowdim.run.store import Store
from lowdim.run.suites import suite_from_dict


def grow(step_mb: int, steps: int) -> int:
    """Allocate and touch memory a step at a time, slowly enough for the RSS poll to see it."""
    blocks = []
    for _ in range(steps):
        blocks.append(np.ones(step_mb * 2**17))
        time.sleep(0.02)
    return len(blocks)


def test_a_result_comes_back():
    outcome = run_limited(divmod, (17, 5), timeout=30, memory_limit=None)
    assert (outcome.status, outcome.value) == ("ok", (3, 2))


@pytest.mark.parametrize("start", ["fork", "host"])
def test_a_hang_is_stopped_at_the_time_limit(monkeypatch, start):
    monkeypatch.setattr(_limits, "START_METHOD", start)
    tic = time.monotonic()
    outcome = run_limited(time.sleep, (600,), timeout=1.0, memory_limit=None)
    assert outcome.status == "timeout"
    assert outcome.error == "stopped after the time limit of 1 s"
    assert time.monotonic() - tic < 20


def test_an_exception_is_failed_with_its_message():
    outcome = run_limited(int, ("x",), timeout=30, memory_limit=None)
    assert outcome.status == "failed"
    assert outcome.error == "ValueError: invalid literal for int() with base 10: 'x'"
    assert "Traceback" in outcome.traceback


def abort_quietly() -> None:
    """Die by SIGABRT as a crashing C extension would, without pytest's fault dump on stderr."""
    faulthandler.disable()
    os.abort()


def test_a_crash_in_compiled_code_is_failed_with_the_signal():
    outcome = run_limited(abort_quietly, (), timeout=30, memory_limit=None)
    assert outcome.status == "failed"
    assert "SIGABRT" in outcome.error


def test_one_huge_allocation_hits_the_address_space_cap():
    outcome = run_limited(bytearray, (8 * 2**30,), timeout=30, memory_limit=256 * 2**20)
    assert outcome.status == "memory"
    assert outcome.error.startswith("ran out of memory under the limit of 256 MB")


def test_gradual_growth_is_stopped_at_the_memory_limit(monkeypatch):
    monkeypatch.setattr(_limits, "START_METHOD", "fork")  # `grow` lives in this test module
    outcome = run_limited(grow, (20, 40), timeout=60, memory_limit=300 * 2**20)
    assert outcome.status == "memory"
    assert "300 MB" in outcome.error


def small_suite(prefix: str, **suite) -> dict:
    return {
        "suite": {"name": "r", "seeds": [0, 1], "neighbors": [5], "timeout": 2, **suite},
        "datasets": [{"name": "swiss_roll", "n": 100}],
        "methods": [
            {"import": "sklearn.decomposition:PCA"},
            {"name": f"{prefix}_first_columns"},
            {"name": f"{prefix}_raises"},
            {"name": f"{prefix}_sleeps"},
        ],
    }


@pytest.fixture
def plugin(tmp_path, monkeypatch):
    install_fake_metrics(monkeypatch)
    prefix = f"rt{abs(hash(str(tmp_path))) % 10**8}"
    path = write_plugin(tmp_path, prefix)
    load_plugin(path)
    return prefix, path


def test_statuses_caching_retry_and_force(tmp_path, plugin):
    prefix, path = plugin
    suite = suite_from_dict(small_suite(prefix), source="r.toml")
    out = tmp_path / "out"
    summary = run_suite(suite, out, quiet=True, plugins=[path])
    assert summary.counts == {"ok": 4, "failed": 2, "timeout": 2}
    with Store(out) as store:
        rows = {(r["method_label"], r["seed"]): r for r in store.jobs()}
        assert store.integrity() == "ok"
    raised = rows[(f"{prefix}_raises", 0)]
    assert raised["status"] == "failed"
    assert raised["error"] == "ArithmeticError: the spectrum of the test matrix is empty"
    assert rows[(f"{prefix}_sleeps", 1)]["error"] == "stopped after the time limit of 2 s"
    first = rows[(f"{prefix}_first_columns", 0)]
    assert first["status"] == "ok" and first["n_samples"] == 100 and first["n_features"] == 3
    emb = np.load(out / "embeddings" / f"{first['job_id']}.npy")
    assert emb.shape == (100, 2)

    again = run_suite(suite, out, quiet=True, plugins=[path])
    assert (again.ran, again.skipped) == (0, 8)

    without_sleeper = small_suite(prefix)
    without_sleeper["methods"].pop()
    suite = suite_from_dict(without_sleeper, source="r.toml")
    retried = run_suite(suite, out, quiet=True, retry=True, plugins=[path])
    assert retried.counts == {"failed": 2}
    forced = run_suite(suite, out, quiet=True, force=True, plugins=[path])
    assert forced.counts == {"ok": 4, "failed": 2}
    # the runner writes the store only: the outputs are rendered from it by the report
    assert not (out / "scores.csv").exists()


def test_seed_and_n_components_reach_the_estimator(tmp_path, plugin):
    prefix, path = plugin
    data = small_suite(prefix, n_components=3, seeds=[7])
    data["methods"] = [{"name": f"{prefix}_first_columns"}]
    suite = suite_from_dict(data, source="r.toml")
    from lowdim.run.worker import build_estimator

    (job,) = suite.jobs()
    params = build_estimator(job).get_params()
    assert (params["n_components"], params["random_state"]) == (3, 7)
    run_suite(suite, tmp_path / "o", quiet=True, plugins=[path])
    with Store(tmp_path / "o") as store:
        (row,) = store.jobs()
        values = dict(((m, k), v) for _, _, _, _, m, k, v in store.score_rows())
    emb = np.load(tmp_path / "o" / "embeddings" / f"{row['job_id']}.npy")
    # the first three columns of the swiss roll itself: an isometry, trustworthiness 1
    # (Venna & Kaski 2001: T = 1 when every embedding neighbour is an input neighbour)
    assert emb.shape == (100, 3)
    assert values[("trustworthiness", 5)] == pytest.approx(1.0)
    assert values[("fit_seconds", 0)] >= 0 and values[("peak_mb", 0)] >= 0


def test_bad_parallel_settings_write_nothing(tmp_path, plugin):
    prefix, _ = plugin
    suite = suite_from_dict(small_suite(prefix), source="r.toml")
    with pytest.raises(ValueError, match="--jobs must be a positive number"):
        run_suite(suite, tmp_path / "none", n_jobs=0)
    with pytest.raises(ValueError, match="unknown backend 'spark'"):
        run_suite(suite, tmp_path / "none", backend="spark")
    assert not (tmp_path / "none").exists()
