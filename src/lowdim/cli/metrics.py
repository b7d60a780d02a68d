"""``lowdim metrics``: the quality criteria with their direction, needs, K and source."""

from __future__ import annotations

import argparse

HELP = "list the quality criteria: which way is better, what data each needs, K, and its source"

_NEEDS = {None: "the data and the embedding", "labels": "class labels", "truth": "ground truth"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("names", nargs="*", help="show only these criteria")


def describe_metric(name: str) -> list[str]:
    """Lines describing one criterion."""
    from lowdim.metrics import get_metric
    from lowdim.metrics._batch import FULL_RANK, PAIRWISE, SAMPLED
    from lowdim.metrics._neighbors import EXACT_THRESHOLD, FULL_RANK_THRESHOLD, SAMPLE_SIZE
    from lowdim.metrics.distances import PAIR_POINTS

    metric = get_metric(name)
    direction = "higher is better" if metric.higher_is_better else "lower is better"
    lines = [f"{name}  ({direction})", f"    {metric.description}"]
    if metric.measured_by_runner:
        lines.append("    needs: nothing; recorded by the runner for every job")
    else:
        lines.append(f"    needs: {_NEEDS.get(metric.needs, metric.needs)}")
    lines.append(f"    K: {metric.k_rule or 'takes K'}" if metric.uses_k else "    K: none")
    if name in SAMPLED or name in FULL_RANK:
        threshold = EXACT_THRESHOLD if name in SAMPLED else FULL_RANK_THRESHOLD
        lines.append(
            f"    size: exact up to n = {threshold}; above, from {SAMPLE_SIZE} random "
            "query points, with a standard error"
        )
    elif name in PAIRWISE:
        lines.append(
            f"    size: all pairs up to n = {PAIR_POINTS}; above, all pairs among "
            f"{PAIR_POINTS} random points"
        )
    lines.append(f"    source: {metric.source}")
    return lines


def run(args: argparse.Namespace) -> int:
    from lowdim.metrics import get_metric, metric_names

    names = args.names or metric_names()
    for name in names:
        get_metric(name)  # unknown names fail before anything is printed
    for i, name in enumerate(names):
        if i:
            print()
        print("\n".join(describe_metric(name)))
    return 0
