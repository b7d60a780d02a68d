"""``lowdim methods``: the registered methods with their parameters, defaults and papers."""

from __future__ import annotations

import argparse
import inspect

from lowdim.methods import get_method, has_transform, method_names, method_origin

HELP = "list the registered methods with their parameters, defaults and the paper each implements"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("names", nargs="*", help="show only these methods")


def describe_method(name: str) -> list[str]:
    """Lines describing one method: origin, paper, parameters with defaults.

    A method without out-of-sample ``transform`` says so; a peer adds what ``lowdim
    compare`` sweeps of it and in which cost tier.
    """
    cls = get_method(name)
    doc = inspect.getdoc(cls) or ""
    summary = doc.splitlines()[0] if doc else cls.__name__
    lines = [f"{name}  ({method_origin(name)})", f"    {summary}"]
    reference = getattr(cls, "_reference", None)
    if reference:
        lines.append(f"    paper: {reference}")
    if not has_transform(cls):
        lines.append("    transform: none (it embeds only the rows it was fitted on)")
    tier = getattr(cls, "cost_tier", None)
    if tier is not None:
        grid = "; ".join(
            f"{key} in {', '.join(map(str, values))}" for key, values in cls.compare_grid.items()
        )
        sweep = "the standard sweep" if tier == "fast" else "the full sweep only"
        lines.append(f"    compare: {grid or 'its defaults'} ({tier}: in {sweep})")
    try:
        params = cls().get_params(deep=False)
    except TypeError:
        params = {}
    if params:
        width = max(len(p) for p in params)
        for key, value in params.items():
            lines.append(f"    {key:<{width}} = {value!r}")
    return lines


def run(args: argparse.Namespace) -> int:
    names = args.names or method_names()
    for name in names:
        get_method(name)  # unknown names fail before anything is printed
    for i, name in enumerate(names):
        if i:
            print()
        print("\n".join(describe_method(name)))
    return 0
