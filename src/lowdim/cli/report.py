"""``lowdim report DIR``: rebuild a run's leaderboards, statistics, figures and HTML report.

It takes no lock: it reads the store through a read-only connection (a consistent snapshot,
even while a run writes) and replaces each output atomically, so a report built during a run
is whole and shows the jobs finished so far; the run rebuilds it when it ends.
"""

from __future__ import annotations

import argparse

from lowdim.cli.paths import user_path

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
    from lowdim.report import build_report

    path = build_report(user_path(args.folder), selection=args.select)
    print(f"report written to {path}")
    return 0
