"""``lowdim datasets``: the datasets a suite can name, with their parameters and sources."""

from __future__ import annotations

import argparse

HELP = "list the datasets (generated, bundled, your own files) with parameters, defaults, sources"

_SOURCES = ("file", "openml")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "names", nargs="*", help="show only these datasets (also `file` or `openml`)"
    )


def describe_dataset(name: str) -> list[str]:
    """Lines describing one dataset: kind, summary, source, citation, parameters."""
    from lowdim.datasets import describe

    info = describe(name)
    lines = [f"{info['name']}  ({info['kind']})", f"    {info['summary']}"]
    lines.append(f"    source: {info['source']}")
    if info["citation"] and info["citation"] != info["source"]:
        lines.append(f"    cite: {info['citation']}")
    params = info["parameters"]
    if params:
        width = max(len(p) for p in params)
        shown = [f"{key:<{width}} = {value!r}" for key, value in params.items()]
        column = max(len(s) for s in shown)
        for text, key in zip(shown, params, strict=True):
            lines.append(f"    {text:<{column}}  # {info['help'][key]}")
    return lines


def run(args: argparse.Namespace) -> int:
    from lowdim.datasets import dataset_names, describe

    names = args.names or [*dataset_names(), *_SOURCES]
    for name in names:
        describe(name)  # unknown names fail before anything is printed
    for i, name in enumerate(names):
        if i:
            print()
        print("\n".join(describe_dataset(name)))
    return 0
