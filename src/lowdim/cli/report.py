"""``lowdim report DIR``: rebuild a run's leaderboards, statistics, figures and HTML report."""

from __future__ import annotations

import argparse

from lowdim.report import build_report

HELP = (
    "rebuild the report of a results folder from its store alone: scores, statistics, "
    "leaderboards (CSV, Markdown, LaTeX), figures and report.html"
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("folder", metavar="DIR", help="a results folder written by `lowdim run`")
    parser.add_argument(
        "--select",
        metavar="CRITERION",
        default=None,
        help="what picks the winner and each method's tuned configuration, instead of the "
        "run's own choice: overall, or a criterion such as rnx_auc or trustworthiness@10",
    )


def run(args: argparse.Namespace) -> int:
    path = build_report(args.folder, selection=args.select)
    print(f"report written to {path}")
    return 0
