"""``lowdim compare FILE``: which method to use on one's own data, with the evidence.

Runs the standard comparison (:mod:`lowdim.run.compare`), writes the full report to the results
folder, and prints a ranked table and a recommendation worked out from the scores.
"""

from __future__ import annotations

import argparse
import sys

from lowdim._files import write_text
from lowdim.analysis.engine import analyse_folder
from lowdim.report import build_report
from lowdim.report.recommendation import recommendation
from lowdim.report.text import fixed_width, wrap_sentence
from lowdim.report.views import overall_table
from lowdim.run.compare import MAX_ROWS, plan_comparison, run_comparison

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
    shape = f"{plan.n_samples} rows"
    runs = f"{plan.n_settings} settings x {seeds} seed{'s' if seeds > 1 else ''}"
    if plan.subsample:
        shape += f", compared on {data} random subsamples of {plan.subsample}"
        runs += f" x {data} subsamples"
    total = plan.n_settings * seeds * data
    print(
        f"lowdim compare: {plan.file.name}, {shape}; {runs} = {total} runs into {plan.out_dir}",
        file=sys.stderr,
    )
    run_comparison(plan, n_jobs=args.jobs, quiet=args.quiet)
    analysis = analyse_folder(plan.out_dir)
    report = build_report(plan.out_dir)
    board = overall_table(analysis, values=True, compact=True)
    parts = [
        f"Ranked by {board.header[2]} (mean ± spread of each headline criterion):",
        fixed_width(board),
        "",
        "Recommendation:",
    ]
    parts += [wrap_sentence(s) for s in recommendation(analysis)]
    text = "\n".join(parts) + "\n"
    write_text(plan.out_dir / "recommendation.txt", text)
    print(text, end="")
    print(f"\nreport: {report}")
    return 0
