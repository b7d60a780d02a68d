"""``lowdim status DIR``: what a results folder holds, without running anything.

It only reads: the store through a read-only connection, the lock's record of a run writing
into the folder now (without taking the lock), and the headers of the finished jobs' files.
"""

from __future__ import annotations

import argparse
from collections import Counter

from lowdim.cli.paths import user_path
from lowdim.run.lock import current_holder
from lowdim.run.store import STATUSES, Store

HELP = "summarise a results folder: jobs done, failed and pending, and the slowest jobs"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("folder", metavar="DIR", help="a results folder written by `lowdim run`")
    parser.add_argument(
        "--slowest", type=int, default=5, metavar="N", help="how many of the slowest jobs to list"
    )


def status_lines(folder: str, slowest: int = 5) -> list[str]:
    """The summary of the results folder ``folder`` as text lines."""
    folder = user_path(folder)
    with Store(folder, read_only=True) as store:
        if not store.table("jobs")[0] or not store.table("runs")[0]:
            return [f"the results store in {str(folder)!r} holds no run yet"]
        run = store.latest_run()
        jobs = {row["job_id"]: row for row in store.jobs()}
        planned = store.planned(run["run_id"]) if run else []
        damaged = store.damaged()
    lines = []
    if run:
        holder = current_holder(folder)
        if run["finished"]:
            state = f"finished {run['finished']}"
        elif holder is not None and holder.alive() is not False:
            state = f"running now ({holder.text()})"
        else:
            state = "did not finish"
        lines.append(
            f"suite {run['suite_name']} ({run['suite_path']}): last run started {run['started']}, "
            f"{state}"
        )
    counts = Counter(row["status"] for row in jobs.values())
    pending = [p for p in planned if p[0] not in jobs]
    parts = [f"{counts.get(s, 0)} {s}" for s in STATUSES]
    lines.append(
        f"{len(planned) or len(jobs)} jobs: " + ", ".join(parts) + f", {len(pending)} pending"
    )
    if damaged:
        n = len(damaged)
        lines.append(
            f"{n} ok job{'s have' if n > 1 else ' has'} a missing or damaged embedding (or "
            "colour or quality file): run the suite again to recompute "
            + ("them" if n > 1 else "it")
        )
        for job_id, problems in list(damaged.items())[:10]:
            row = jobs[job_id]
            files = "; ".join(f"{name} {problem}" for name, problem in problems)
            lines.append(
                f"  {job_id}  {row['method_label']} on {row['dataset_label']} "
                f"(seed {row['seed']}): {files}"
            )
        if n > 10:
            lines.append(f"  ... and {n - 10} more")
    bad = [row for row in jobs.values() if row["status"] != "ok"]
    if bad:
        lines.append("")
        lines.append("not ok:")
        for row in bad:
            lines.append(
                f"  {row['job_id']}  {row['method_label']} on {row['dataset_label']} "
                f"(seed {row['seed']}): {row['status']}: {row['error']}"
            )
    timed = sorted(
        (row for row in jobs.values() if row["fit_seconds"] is not None),
        key=lambda row: -row["fit_seconds"],
    )[: max(0, slowest)]
    if timed:
        lines.append("")
        lines.append("slowest fits:")
        for row in timed:
            peak = "" if row["peak_mb"] is None else f", {row['peak_mb']:.0f} MB"
            lines.append(
                f"  {row['fit_seconds']:8.2f} s{peak}  {row['method_label']} on "
                f"{row['dataset_label']} (seed {row['seed']})"
            )
    if pending:
        lines.append("")
        lines.append(f"pending ({len(pending)}); run the suite again to finish them:")
        for job_id, dataset, method, seed in pending[:10]:
            lines.append(f"  {job_id}  {method} on {dataset} (seed {seed})")
        if len(pending) > 10:
            lines.append(f"  ... and {len(pending) - 10} more")
    return lines


def run(args: argparse.Namespace) -> int:
    print("\n".join(status_lines(args.folder, args.slowest)))
    return 0
