"""``lowdim run SUITE``: run a suite's jobs in parallel, record them, build the report."""

from __future__ import annotations

import argparse
import logging
import sys
from pathlib import Path

from lowdim.report import build_report
from lowdim.run.runner import BACKENDS, RunSummary, run_suite
from lowdim.run.store import Store
from lowdim.run.suites import Suite, load_suite

log = logging.getLogger("lowdim.cli.run")

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
    again.add_argument("--force", action="store_true", help="recompute every job")
    again.add_argument(
        "--retry",
        action="store_true",
        help="rerun the jobs that failed, timed out or ran out of memory",
    )
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bar")
    parser.add_argument(
        "--no-report",
        dest="report",
        action="store_false",
        help="skip the report: export the scores and print the leaderboard as a table",
    )


def leaderboard_lines(out_dir: Path, suite: Suite) -> list[str]:
    """The mean headline criterion per dataset (rows) and method (columns), as text lines."""
    with Store(out_dir, create=False) as store:
        ks = sorted(
            k
            for (k,) in store.db.execute(
                "SELECT DISTINCT k FROM scores WHERE metric = ?", (suite.headline,)
            )
        )
        if not ks:
            return [f"no `{suite.headline}` scores to show"]
        first = suite.headline_keys[0] if suite.headline_keys else suite.headline
        asked = int(first.partition("@")[2] or -1)
        k = asked if asked in ks else 0 if 0 in ks else ks[len(ks) // 2]
        means = store.headline_means(suite.headline, k)
    datasets = [e.label for e in suite.datasets]
    methods = [e.label for e in suite.methods]
    title = suite.headline if k == 0 else f"{suite.headline} (K = {k})"
    first = max(len("dataset"), *(len(d) for d in datasets))
    widths = [max(7, len(m)) for m in methods]
    lines = [f"mean {title} over seeds", ""]
    lines.append(
        "  ".join(
            ["dataset".ljust(first), *(m.rjust(w) for m, w in zip(methods, widths, strict=True))]
        )
    )
    for d in datasets:
        cells = []
        for m, w in zip(methods, widths, strict=True):
            value = means.get((d, m))
            cells.append(("-" if value is None else f"{value:.3f}").rjust(w))
        lines.append("  ".join([d.ljust(first), *cells]))
    return lines


def summary_line(summary: RunSummary) -> str:
    parts = [f"{summary.total} jobs", f"{summary.ran} run", f"{summary.skipped} already done"]
    for status in ("ok", "failed", "timeout", "memory"):
        if summary.counts.get(status):
            parts.append(f"{summary.counts[status]} {status}")
    return f"lowdim: {', '.join(parts)} in {summary.seconds:.1f} s; results in {summary.out_dir}"


def run(args: argparse.Namespace) -> int:
    suite = load_suite(args.suite)
    out_dir = Path(args.out) if args.out else Path("results") / suite.name
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
    )
    report, report_error = _report(out_dir) if args.report else (None, None)
    if report is None:
        print("\n".join(leaderboard_lines(out_dir, suite)))
    else:
        print(f"report: {report}")
    print(summary_line(summary), file=sys.stderr)
    if report_error:
        print(
            f"lowdim: error: the report could not be built ({report_error}); every "
            f"result is kept in {out_dir}, and `lowdim report {out_dir}` builds it again",
            file=sys.stderr,
        )
        return 1
    return 0


def _report(out_dir: Path) -> tuple[Path | None, str | None]:
    """Build the report: ``(path or None, error or None)``.

    A failing report does not undo the run: the store and ``scores.csv`` are complete, so the
    error is shown and ``lowdim report DIR`` can build it again.
    """
    try:
        return build_report(out_dir), None
    except Exception as exc:
        log.debug("the report failed", exc_info=True)
        return None, f"{type(exc).__name__}: {' '.join(str(exc).split())}"
