"""``lowdim compare FILE``: which method to use on one's own data, with the evidence.

Runs the standard comparison (:mod:`lowdim.run.compare`), writes the full report to the results
folder, and prints a ranked table and a recommendation worked out from the scores.
"""

from __future__ import annotations

import argparse
import sys
import textwrap

from lowdim.report import build_report
from lowdim.run.compare import MAX_ROWS, plan_comparison, run_comparison, write_text

HELP = "compare the built-in methods (and your plugins) on your own data file and recommend one"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="the data: CSV, TSV, Parquet, NPY or NPZ")
    parser.add_argument("--labels", metavar="COL", help="a column of class labels, if any")
    parser.add_argument(
        "--drop", action="append", default=[], metavar="COL", help="a column to leave out"
    )
    parser.add_argument(
        "--out", metavar="DIR", help="results folder (default: results/compare-<file stem>/)"
    )
    parser.add_argument(
        "--jobs",
        "-j",
        type=int,
        default=-1,
        metavar="N",
        help="parallel jobs (default -1: one per core)",
    )
    parser.add_argument(
        "--quick",
        action="store_true",
        help="a smaller sweep for a first look (2 seeds, fewer bandwidths and neighbour counts)",
    )
    parser.add_argument(
        "--max-rows",
        type=int,
        default=MAX_ROWS,
        metavar="N",
        help=f"compare larger files on random subsamples of N rows ({MAX_ROWS})",
    )
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bar")


def _wrap(sentence: str) -> str:
    return textwrap.fill(sentence, width=99, initial_indent="- ", subsequent_indent="  ")


def run(args: argparse.Namespace) -> int:
    plan = plan_comparison(
        args.file,
        labels=args.labels,
        drop=args.drop,
        plugins=args.plugin,
        out_dir=args.out,
        quick=args.quick,
        max_rows=args.max_rows,
    )
    for note in plan.warnings:
        print(f"lowdim: warning: {note}", file=sys.stderr)
    seeds = len(plan.suite["suite"]["seeds"])
    data = len(plan.suite["datasets"])
    shape = f"{plan.facts.n_samples} rows"
    runs = f"{plan.n_settings} settings x {seeds} seed{'s' if seeds > 1 else ''}"
    if plan.facts.subsample:
        shape += f", compared on {data} random subsamples of {plan.facts.subsample}"
        runs += f" x {data} subsamples"
    total = plan.n_settings * seeds * data
    print(
        f"lowdim compare: {plan.file.name}, {shape}; {runs} = {total} runs into {plan.out_dir}",
        file=sys.stderr,
    )
    outcome = run_comparison(plan, n_jobs=args.jobs, quiet=args.quiet)
    outcome.report = build_report(plan.out_dir)
    names = ", ".join(c.label for c in plan.criteria if c.label in outcome.table)
    heading = f"Ranked by mean rank over {names} (mean ± sd over the repeats):"
    parts = [heading, outcome.table, "", "Recommendation:"]
    parts += [_wrap(s) for s in outcome.recommendation]
    text = "\n".join(parts if outcome.table else parts[3:]) + "\n"
    write_text(plan.out_dir / "recommendation.txt", text)
    print(text, end="")
    if outcome.report is not None:
        print(f"\nreport: {outcome.report}")
    return 0
