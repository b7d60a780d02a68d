"""score_embedding: one shared computation giving the same numbers as the single criteria."""

import numpy as np
import pytest

from lowdim.errors import InputError
from lowdim.metrics import Metric, _registry, get_metric, score_embedding
from lowdim.metrics.coranking import rnx_grid


def _roll(n=240, seed=0):
    rng = np.random.default_rng(seed)
    t = rng.uniform(1.5 * np.pi, 4.5 * np.pi, n)
    h = rng.uniform(0, 10, n)
    X = np.c_[t * np.cos(t), h, t * np.sin(t)] + 0.1 * rng.normal(size=(n, 3))
    truth = np.c_[t, h]
    Y = truth + 0.3 * rng.normal(size=(n, 2))
    labels = (np.floor(t / 2) % 2).astype(int)
    return X, Y, labels, truth


def test_every_value_equals_the_criterion_called_alone():
    X, Y, labels, truth = _roll()
    scores = score_embedding(X, Y, ks=(3, 10), labels=labels, truth=truth)
    assert scores.notes == [] and scores.sample_size is None and scores.standard_errors == {}
    seen = set()
    for name, k, value in scores.values:
        seen.add(name)
        metric = get_metric(name)
        alone = metric.fn(X, Y, k=k if metric.uses_k else None, labels=labels, truth=truth)
        assert value == pytest.approx(alone, abs=1e-12), (name, k)
    assert seen == {m for m in _registry.metric_names() if not get_metric(m).measured_by_runner}


def test_rnx_is_reported_on_the_log_grid():
    X, Y, _, _ = _roll(n=60)
    scores = score_embedding(X, Y, metrics=["rnx"], ks=(10,))
    ks = [k for name, k, _ in scores.values if name == "rnx"]
    # The grid goes up to n - 2 = 58 here, and includes the requested K.
    assert ks == sorted(set(rnx_grid(58)) | {10})
    assert len(ks) == len(set(ks))


def test_skipped_criteria_are_noted():
    X, Y, _, truth = _roll(n=40)
    scores = score_embedding(X, Y, ks=(5, 25), truth=truth[:, :1])
    notes = " | ".join(scores.notes)
    assert "knn_accuracy, silhouette skipped: no labels" in notes
    assert "truth_procrustes skipped" in notes and "Procrustes needs the same number" in notes
    assert "trustworthiness skipped at k = 25" in notes and "n/2" in notes
    assert ("trustworthiness", 5, scores.get("trustworthiness", 5)) in scores.values
    assert ("truth_spearman", 0, scores.get("truth_spearman")) in scores.values
    with pytest.raises(KeyError):
        scores.get("trustworthiness", 25)


def test_runner_numbers_are_not_computed_here():
    X, Y, _, _ = _roll(n=40)
    scores = score_embedding(X, Y, metrics=["stress", "fit_seconds"])
    assert [name for name, _, _ in scores.values] == ["stress"]
    assert any("fit_seconds: recorded by the runner" in note for note in scores.notes)


def test_sampled_mode_reports_the_sample_and_stays_within_its_errors():
    X, Y, labels, _ = _roll(n=900, seed=1)
    exact = score_embedding(X, Y, metrics=["trustworthiness", "continuity", "rnx_auc"])
    sampled = score_embedding(
        X,
        Y,
        metrics=["trustworthiness", "continuity", "rnx_auc", "qnx"],
        exact_threshold=300,
        full_rank_threshold=300,
        sample_size=250,
        random_state=3,
    )
    assert sampled.sample_size == 250
    notes = " | ".join(sampled.notes)
    assert "trustworthiness, continuity estimated from 250 random query points of 900" in notes
    assert "rnx_auc estimated from 250 random query points of 900" in notes
    for name in ("trustworthiness", "continuity"):
        for k in (5, 10, 30):
            se = sampled.standard_errors[(name, k)]
            assert 0 < se < 0.05
            # A sample mean lies within a few standard errors of the population value.
            assert abs(sampled.get(name, k) - exact.get(name, k)) < 4 * se
    se = sampled.standard_errors[("rnx_auc", 0)]
    assert abs(sampled.get("rnx_auc") - exact.get("rnx_auc")) < 4 * se
    # Q_NX needs the neighbour lists only: exact whatever n.
    assert ("qnx", 10) not in sampled.standard_errors


def test_no_criterion_changes_under_rotation_translation_or_scaling():
    X, Y, labels, truth = _roll(n=150, seed=2)
    angle = 0.7
    rotation = np.array([[np.cos(angle), -np.sin(angle)], [np.sin(angle), np.cos(angle)]])
    base = score_embedding(X, Y, ks=(5, 10), labels=labels, truth=truth).as_dict()
    for moved in (Y @ rotation, Y + [40.0, -3.0], 0.01 * Y, 250.0 * Y):
        other = score_embedding(X, moved, ks=(5, 10), labels=labels, truth=truth).as_dict()
        assert other.keys() == base.keys()
        for key, value in base.items():
            # Every criterion here depends on the embedding only up to a similarity
            # transform (ranks, rank correlations, optimally scaled stress, Procrustes).
            assert other[key] == pytest.approx(value, abs=1e-9), key


def test_a_registered_outside_criterion_is_called_per_k(monkeypatch):
    calls = []

    def spread(X, Y, *, k=None, labels=None, truth=None):
        calls.append(k)
        return float(k)

    metric = Metric("spread", spread, True, None, True, "test", "test", "k >= 1", lambda n: n - 1)
    monkeypatch.setitem(_registry._METRICS, "spread", metric)
    X, Y, _, _ = _roll(n=40)
    scores = score_embedding(X, Y, metrics=["spread"], ks=(2, 4))
    assert scores.values == [("spread", 2, 2.0), ("spread", 4, 4.0)] and calls == [2, 4]


def test_bad_input_is_one_clear_error():
    X, Y, labels, _ = _roll(n=40)
    bad = Y.copy()
    bad[3, 1] = np.nan
    with pytest.raises(InputError, match="embedding `Y`.*NaN or infinity.*cannot be scored"):
        score_embedding(X, bad)
    with pytest.raises(InputError, match="infinity"):
        score_embedding(X, np.where(bad == bad, bad, np.inf))
    with pytest.raises(InputError, match="40 rows but the embedding `Y`.* has 39"):
        score_embedding(X, Y[:-1])
    with pytest.raises(InputError, match="one label per row of X"):
        score_embedding(X, Y, labels=labels[:10])
    with pytest.raises(InputError, match="at least 1"):
        score_embedding(X, Y, ks=(0, 5))
    with pytest.raises(InputError, match="unknown quality criterion 'stres'.*'stress'"):
        score_embedding(X, Y, metrics=["stres"])
    with pytest.raises(InputError, match="same point"):
        score_embedding(X, np.zeros_like(Y))
