"""A results store read into data frames, with the settings record of its latest run.

Everything downstream is computed from ``store.sqlite`` alone, so a report can be rebuilt at
any time without the suite file, the plugins or the data. Vocabulary:

- a *criterion key* is ``"metric@K"`` for criteria that take a neighbourhood size K
  (e.g. ``"trustworthiness@10"``) and the bare metric name for the others (k = 0 in the
  store, e.g. ``"rnx_auc"``);
- a *dataset* is a dataset spec without its seed, shown by its display label;
- a *configuration* is one method spec (a method with fixed parameters), shown by its label;
  a *family* is the method name the configurations share.
"""

from __future__ import annotations

import json
import math
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from lowdim.errors import InputError
from lowdim.run.settings import Settings, criterion_key
from lowdim.run.store import STORE_NAME, Store, job_file_problems

__all__ = ["STORE_NAME", "Results", "load_results", "criterion_table", "canonical", "json_dict"]

# Keys that change with the job's seed rather than describing the spec itself.
_SEED_KEYS = ("seed", "random_state")
DAMAGED_COLUMNS = ["job_id", "dataset", "method", "seed", "file", "problem"]
# What every jobs frame has beyond the store's columns (also when no job has finished yet).
_LABEL_COLUMNS = ("data_spec", "config_spec", "data", "config", "family")


@dataclass(frozen=True)
class Results:
    """A results store read into data frames.

    Attributes
    ----------
    out_dir : Path
        The run's folder.
    jobs : DataFrame
        One row per job of the latest run's plan, with the store's columns plus ``data``
        (dataset display label, unique per spec without its seed), ``config`` (configuration
        display label), ``family`` (method name), ``data_spec`` and ``config_spec``
        (parameter dicts without seeds).
    scores : DataFrame
        ``job_id, metric, k, value``.
    runs : DataFrame
        The ``runs`` table.
    settings : Settings
        The settings record of the latest run.
    confirmation : DataFrame
        The jobs of the confirmation run that followed the latest run of a comparison (the
        columns of ``jobs``), empty when there is none; ``confirmation_scores`` their scores.
    damaged : DataFrame
        One row per missing or damaged file of a finished job (``job_id, dataset, method,
        seed, file, problem``; the file relative to the folder). Their scores stand; what
        needs the file (the gallery, stability across seeds) goes without it.
    """

    out_dir: Path
    jobs: pd.DataFrame
    scores: pd.DataFrame
    runs: pd.DataFrame
    settings: Settings
    confirmation: pd.DataFrame = field(default_factory=pd.DataFrame)
    confirmation_scores: pd.DataFrame = field(default_factory=pd.DataFrame)
    damaged: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=DAMAGED_COLUMNS))

    def embedding_path(self, job_id: str) -> Path:
        """Where the runner keeps a job's embedding."""
        return self.out_dir / "embeddings" / f"{job_id}.npy"

    def _damaged_files(self) -> set[str]:
        return set(self.damaged["file"])

    def _array(self, name: str) -> np.ndarray | None:
        """The array in the folder's file ``name``; None when it is missing or damaged."""
        if name in self._damaged_files():
            return None
        try:
            return np.load(self.out_dir / name, allow_pickle=False)
        except (OSError, ValueError, EOFError):  # gone or cut short since the store was read
            return None

    def embedding(self, job_id: str) -> np.ndarray | None:
        """A job's embedding; None when its file is missing or damaged (see ``damaged``)."""
        return self._array(f"embeddings/{job_id}.npy")

    def quality(self, job_id: str) -> dict[str, np.ndarray] | None:
        """A job's per-point quality arrays (``rows`` and ``"metric@K"`` keys); None when it
        has none or its file is damaged."""
        name = f"quality/{job_id}.npz"
        if name in self._damaged_files() or not (self.out_dir / name).is_file():
            return None
        try:
            with np.load(self.out_dir / name, allow_pickle=False) as stored:
                return {key: stored[key] for key in stored.files}
        except (OSError, ValueError, EOFError, zipfile.BadZipFile):
            return None

    def colours(self, job: Any) -> tuple[str, np.ndarray] | None:
        """The kind and values that colour a job's points, stored at job time; None if absent
        or damaged."""
        ref = job.get("colour") if hasattr(job, "get") else None
        if not isinstance(ref, str) or ":" not in ref:
            return None
        kind, _, digest = ref.partition(":")
        values = self._array(f"colours/{digest}.npy")
        return None if values is None else (kind, values)


def json_dict(text: Any) -> dict:
    """A stored JSON object as a dict (empty for a missing value)."""
    if isinstance(text, dict):
        return text
    if text is None or (isinstance(text, float) and math.isnan(text)) or text == "":
        return {}
    value = json.loads(text)
    return value if isinstance(value, dict) else {"value": value}


def canonical(params: dict) -> str:
    """A parameter dict as canonical JSON (sorted keys), for grouping and comparing specs."""
    return json.dumps(params, sort_keys=True, default=str)


def _without(params: dict, keys: tuple[str, ...]) -> dict:
    return {k: v for k, v in params.items() if k not in keys}


def _unique_labels(labels: pd.Series, specs: pd.Series) -> pd.Series:
    """Keep each label, adding the parameters that differ when one label covers several specs."""
    keys = specs.map(canonical)
    base = labels.astype(str)
    out = base.copy()
    for label in base.unique():
        mask = base == label
        distinct = {key: json.loads(key) for key in keys[mask].unique()}
        if len(distinct) < 2:
            continue
        names = sorted({k for d in distinct.values() for k in d})
        varying = [
            k for k in names if len({canonical({"v": d.get(k)}) for d in distinct.values()}) > 1
        ]
        for key, d in distinct.items():
            extra = ", ".join(f"{k}={d.get(k)}" for k in varying)
            out[mask & (keys == key)] = f"{label} [{extra}]"
    return out


def _frame(store: Store, name: str) -> pd.DataFrame:
    columns, rows = store.table(name)
    return pd.DataFrame(rows, columns=columns)


def _latest_plan(jobs: pd.DataFrame, planned: pd.DataFrame, run_id: int) -> pd.DataFrame:
    """The jobs the latest run planned: a folder keeps every job it ever ran, so a suite edited
    and run again leaves the jobs of its earlier form behind; the report speaks of the suite as
    it is now."""
    if planned.empty or jobs.empty:
        return jobs
    latest = set(planned.loc[planned["run_id"] == run_id, "job_id"])
    return jobs[jobs["job_id"].isin(latest)].reset_index(drop=True)


def _labelled(jobs: pd.DataFrame) -> pd.DataFrame:
    """Jobs with their display labels, specs without seeds and numeric columns."""
    if jobs.empty:
        return jobs.reindex(columns=[*jobs.columns, *_LABEL_COLUMNS])
    jobs = jobs.copy()
    jobs["data_spec"] = jobs["dataset_params"].map(json_dict).map(lambda d: _without(d, ("seed",)))
    jobs["config_spec"] = (
        jobs["method_params"].map(json_dict).map(lambda d: _without(d, _SEED_KEYS))
    )
    jobs["data"] = _unique_labels(jobs["dataset_label"], jobs["data_spec"])
    jobs["config"] = _unique_labels(jobs["method_label"], jobs["config_spec"])
    jobs["family"] = jobs["method"].astype(str)
    for col in ("fit_seconds", "peak_mb", "n_samples", "n_features", "seed"):
        jobs[col] = pd.to_numeric(jobs[col], errors="coerce")
    return jobs


def _scores_of(scores: pd.DataFrame, jobs: pd.DataFrame) -> pd.DataFrame:
    """The scores of ``jobs``, ``k`` and ``value`` numeric."""
    if scores.empty or jobs.empty:
        return pd.DataFrame(columns=["job_id", "metric", "k", "value"])
    out = scores[scores["job_id"].isin(set(jobs["job_id"]))].reset_index(drop=True)
    out["k"] = pd.to_numeric(out["k"]).fillna(0).astype(int)
    out["value"] = pd.to_numeric(out["value"], errors="coerce")
    return out


def load_results(out_dir: str | Path) -> Results:
    """Read ``out_dir/store.sqlite`` (read-only) into a :class:`Results`.

    Raises
    ------
    InputError
        When the folder holds no store, or the store no run with a settings record; a store
        whose latest run has no finished job yet gives empty ``jobs``.
    """
    out_dir = Path(out_dir)
    try:
        store = Store(out_dir, read_only=True)
    except FileNotFoundError:
        raise InputError(
            f"no results store in {str(out_dir)!r} (expected {STORE_NAME} there); give the "
            "folder a `lowdim run` wrote to"
        ) from None
    try:
        jobs = _frame(store, "jobs")
        scores = _frame(store, "scores")
        runs = _frame(store, "runs")
        planned = _frame(store, "planned")
    finally:
        store.close()
    recorded = runs.dropna(subset=["settings"]) if "settings" in runs else runs.iloc[0:0]
    confirming = recorded["kind"].eq("confirmation") if "kind" in recorded else False
    main = recorded[~confirming] if len(recorded) else recorded
    if runs.empty:
        raise InputError(
            f"the results store in {str(out_dir)!r} holds no run yet (one was stopped before "
            "it began); run the suite into that folder"
        )
    if main.empty:
        raise InputError(
            f"the results store in {str(out_dir)!r} has no settings record (it was written by "
            "an older lowdim); run its suite again into the same folder: finished jobs are "
            "reused and the record is written"
        )
    latest = main.sort_values("run_id").iloc[-1]
    settings = Settings.from_json(str(latest["settings"]))
    later = recorded[confirming & (recorded["run_id"] > latest["run_id"])]
    confirm_jobs = pd.DataFrame()
    if len(later):
        confirm_jobs = _labelled(_latest_plan(jobs, planned, int(later["run_id"].max())))
    jobs = _labelled(_latest_plan(jobs, planned, int(latest["run_id"])))
    confirm_scores = _scores_of(scores, confirm_jobs)
    scores = _scores_of(scores, jobs)
    return Results(
        out_dir=out_dir,
        jobs=jobs,
        scores=scores,
        runs=runs,
        settings=settings,
        confirmation=confirm_jobs,
        confirmation_scores=confirm_scores,
        damaged=_damaged(out_dir, pd.concat([jobs, confirm_jobs], ignore_index=True)),
    )


def _damaged(out_dir: Path, jobs: pd.DataFrame) -> pd.DataFrame:
    """The missing or damaged files of the finished jobs in ``jobs``, one row each."""
    rows, checked = [], {}
    if "status" in jobs:
        for _, job in jobs[jobs["status"] == "ok"].iterrows():
            for name, problem in job_file_problems(out_dir, job, checked):
                rows.append(
                    [job["job_id"], job["data"], job["config"], job["seed"], name, problem]
                )
    return pd.DataFrame(rows, columns=DAMAGED_COLUMNS)


def criterion_table(results: Results) -> pd.DataFrame:
    """Scores of finished jobs in long form with display labels and the criterion key.

    Columns: ``job_id, dataset, method, family, seed, metric, k, criterion, value``.
    Failed jobs are left out: a partial timing from a failed job is not a result.
    """
    ok = results.jobs[results.jobs["status"] == "ok"]
    table = results.scores.merge(
        ok[["job_id", "data", "config", "family", "seed"]], on="job_id", how="inner"
    )
    table = table.rename(columns={"data": "dataset", "config": "method"})
    table["criterion"] = [
        criterion_key(m, k) for m, k in zip(table["metric"], table["k"], strict=True)
    ]
    cols = ["job_id", "dataset", "method", "family", "seed", "metric", "k", "criterion", "value"]
    return table[cols].reset_index(drop=True)
