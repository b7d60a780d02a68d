"""``lowdim compare FILE``: which method to use on one's own data, with the evidence.

Plans the comparison (:mod:`lowdim.run.compare`: what it sees in the columns, the candidates,
the resamples), runs it, refits the leading settings on the whole file
(:mod:`lowdim.run.confirm`), writes the report, and prints the ranked table, the
recommendation and the ``lowdim embed`` command for the winner.
"""

from __future__ import annotations

import argparse
import math
import shlex
import sys

from lowdim._files import write_text
from lowdim.cli.paths import check_out_folder
from lowdim.cli.run import add_wait_argument
from lowdim.run.compare import (
    MAX_ROWS,
    SCALES,
    CompareOptions,
    ComparePlan,
    plan_comparison,
    run_comparison,
)
from lowdim.run.confirm import run_confirmation
from lowdim.run.folder import results_folder

HELP = "compare the built-in methods, the usual peers and your plugins on your own data file"

LEADERS = 3
"""How many of the leading settings are refitted on the whole file (with the best PCA)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="the data: CSV, TSV, Parquet, NPY or NPZ")
    columns = parser.add_argument_group("columns")
    columns.add_argument("--labels", metavar="COL", help="a column of class labels, if any")
    columns.add_argument(
        "--features",
        action="append",
        default=[],
        metavar="COL",
        help="a column to use as a feature (repeatable; default: every other numeric column)",
    )
    columns.add_argument(
        "--drop", action="append", default=[], metavar="COL", help="a column to leave out"
    )
    columns.add_argument(
        "--keep",
        action="append",
        default=[],
        metavar="COL",
        help="a column carried into the outputs (an id), never used as a feature",
    )
    prep = parser.add_argument_group("preprocessing, in this order")
    prep.add_argument("--log1p", action="store_true", help="replace each value x by log(1 + x)")
    prep.add_argument(
        "--scale", choices=SCALES, default="none", help="column scaling (default: none)"
    )
    prep.add_argument(
        "--pca-first", type=int, metavar="N", help="keep the first N principal components"
    )
    sweep = parser.add_mutually_exclusive_group()
    sweep.add_argument(
        "--quick",
        action="store_const",
        const="quick",
        dest="sweep",
        help="a first look: each built-in method once or twice, 3 resamples",
    )
    sweep.add_argument(
        "--full",
        action="store_const",
        const="full",
        dest="sweep",
        help="wider bandwidth and neighbour grids, every peer (slow ones too), 3 seeds",
    )
    parser.set_defaults(sweep="standard")
    parser.add_argument(
        "--methods",
        action="append",
        default=[],
        metavar="NAME",
        help="compare only these methods (repeatable)",
    )
    parser.add_argument(
        "--with",
        action="append",
        default=[],
        metavar="MODULE:CLASS",
        dest="extra",
        help="add any scikit-learn compatible transformer as a candidate (repeatable)",
    )
    parser.add_argument(
        "--n-components", type=int, default=2, metavar="N", help="output dimensions (2)"
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
        "--max-rows",
        type=int,
        default=MAX_ROWS,
        metavar="N",
        help=f"rows in each resample at most ({MAX_ROWS})",
    )
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bar")
    add_wait_argument(parser)


def options_from(args: argparse.Namespace) -> CompareOptions:
    return CompareOptions(
        labels=args.labels,
        features=tuple(args.features),
        drop=tuple(args.drop),
        keep=tuple(args.keep),
        scale=args.scale,
        log1p=args.log1p,
        pca_first=args.pca_first,
        n_components=args.n_components,
        sweep=args.sweep,
        max_rows=args.max_rows,
        methods=tuple(args.methods),
        extra=tuple(args.extra),
    )


def run(args: argparse.Namespace) -> int:
    from lowdim.datasets.headers import check_readable

    out = check_out_folder(args.out) if args.out else None
    try:
        check_readable(args.file, f"the data file {args.file!r}")
    except FileNotFoundError:
        pass  # plan_comparison words a missing file
    plan = plan_comparison(args.file, options_from(args), plugins=args.plugin, out_dir=out)
    check_out_folder(plan.out_dir)
    # one lock over the comparison, its confirmation and the outputs
    with results_folder(plan.out_dir, wait=args.wait, command=shlex.join(sys.argv)):
        return _compare(plan, args)


def _compare(plan: ComparePlan, args: argparse.Namespace) -> int:
    # scipy.stats and matplotlib load only when a comparison runs (see lowdim.cli.run)
    from lowdim.analysis.engine import analyse_folder
    from lowdim.report import build_report
    from lowdim.report.recommendation import embed_command, recommendation
    from lowdim.report.text import fixed_width, wrap_sentence
    from lowdim.report.views import overall_table

    for note in plan.warnings:
        print(f"lowdim: warning: {note}", file=sys.stderr)
    for finding in plan.context["findings"]:
        print(f"lowdim: columns: {finding}", file=sys.stderr)
    seeds = len(plan.suite["suite"]["seeds"])
    repeats = len(plan.suite["datasets"])
    runs = plan.n_settings * seeds * repeats
    print(
        f"lowdim compare: {plan.file.name}, {plan.n_samples} rows; {plan.n_settings} settings x "
        f"{repeats} resamples of {plan.resample_size} rows"
        + (f" x {seeds} seeds" if seeds > 1 else "")
        + f" = {runs} runs into {plan.out_dir}",
        file=sys.stderr,
    )
    run_comparison(plan, n_jobs=args.jobs, quiet=args.quiet)
    first = analyse_folder(plan.out_dir)
    ranked = [m for m in first.order if math.isfinite(first.selection_ranks[m])]
    leaders = ranked[:LEADERS]
    leaders += [m for m in ranked if first.family(m) == "pca" and m not in leaders][:1]
    if leaders:  # a setting that failed on every resample is not refitted
        run_confirmation(
            plan, [(m, first.spec_of(m)) for m in leaders], n_jobs=args.jobs, quiet=args.quiet
        )
    analysis = analyse_folder(plan.out_dir)
    report = build_report(plan.out_dir, analysis=analysis)
    board = overall_table(analysis, values=True, compact=True)
    parts = [
        f"Ranked by {board.header[2]} (mean ± spread over the resamples):",
        fixed_width(board),
        "",
        "Recommendation:",
    ]
    parts += [wrap_sentence(s) for s in recommendation(analysis)]
    command = embed_command(analysis)
    if command:
        parts += ["", "To embed the whole file with it:", f"  {command}"]
    text = "\n".join(parts) + "\n"
    write_text(plan.out_dir / "recommendation.txt", text)
    print(text, end="")
    print(f"\nreport: {report}")
    return 0
