"""``lowdim run SUITE``: run a suite's jobs in parallel, record them, build the report."""

from __future__ import annotations

import argparse
import shlex
import sys
from pathlib import Path

from lowdim.cli.paths import check_out_folder
from lowdim.errors import InputError
from lowdim.run.folder import results_folder
from lowdim.run.runner import BACKENDS, RunSummary, run_suite
from lowdim.run.suites import load_suite

HELP = "run a suite of datasets x methods x seeds, resuming where a previous run stopped"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "suite", metavar="SUITE", help="the suite file (TOML), e.g. suites/quick.toml"
    )
    parser.add_argument(
        "--out", metavar="DIR", help="results folder (default: results/<suite name>/)"
    )
    parser.add_argument(
        "--jobs",
        "-j",
        type=int,
        default=-1,
        metavar="N",
        help="parallel jobs (default -1: one per core, within the suite's threads per job)",
    )
    parser.add_argument("--backend", choices=BACKENDS, default="loky", help="parallel backend")
    parser.add_argument(
        "--scheduler", metavar="ADDRESS", help="dask scheduler address (with --backend dask)"
    )
    again = parser.add_mutually_exclusive_group()
    again.add_argument(
        "--force",
        action="store_true",
        help="recompute every job (a job that finished ok is replaced even if it now fails)",
    )
    again.add_argument(
        "--retry",
        action="store_true",
        help="rerun the jobs that failed, timed out or ran out of memory",
    )
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bar")
    add_wait_argument(parser)
    parser.add_argument(
        "--no-report",
        dest="report",
        action="store_false",
        help="skip the figures and report.html: write the scores, statistics and leaderboards "
        "and print the verdict",
    )


def add_wait_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--wait",
        action="store_true",
        help="when another run is writing into the results folder, wait for it to end "
        "(without: stop at once, saying which run it is)",
    )


def summary_line(summary: RunSummary) -> str:
    parts = [f"{summary.total} jobs", f"{summary.ran} run", f"{summary.skipped} already done"]
    for status in ("ok", "failed", "timeout", "memory"):
        if summary.counts.get(status):
            parts.append(f"{summary.counts[status]} {status}")
    return f"lowdim: {', '.join(parts)} in {summary.seconds:.1f} s; results in {summary.out_dir}"


def run(args: argparse.Namespace) -> int:
    # The analysis and the report load scipy.stats and matplotlib: only when a run needs them,
    # so that `lowdim --help` and the light commands start at once.
    from lowdim.analysis.engine import analyse_folder
    from lowdim.report import build_report
    from lowdim.report.build import write_tables
    from lowdim.report.text import run_summary

    if args.scheduler:
        if args.backend != "dask":
            raise InputError("--scheduler is for the dask backend; add --backend dask")
        from lowdim.run.cluster import check_scheduler

        check_scheduler(args.scheduler)  # before the suite: a dead address is told at once
    suite = load_suite(args.suite)
    out_dir = check_out_folder(Path(args.out) if args.out else Path("results") / suite.name)
    command = shlex.join(sys.argv)
    # the lock spans the run and the outputs it writes after it
    with results_folder(out_dir, wait=args.wait, command=command) as out_dir:
        summary = run_suite(
            suite,
            out_dir,
            n_jobs=args.jobs,
            backend=args.backend,
            scheduler=args.scheduler,
            force=args.force,
            retry=args.retry,
            quiet=args.quiet,
            plugins=args.plugin,
            command=command,
        )
        analysis = analyse_folder(out_dir)
        if args.report:
            report = build_report(out_dir, analysis=analysis)
        else:
            write_tables(analysis)
            report = None
    print(run_summary(analysis))
    if report is not None:
        print(f"\nreport: {report}")
    print(summary_line(summary), file=sys.stderr)
    return 0
