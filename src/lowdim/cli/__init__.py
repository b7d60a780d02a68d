"""The ``lowdim`` command line: argparse front end and one module per sub-command.

Each sub-command module has ``HELP``, ``add_arguments(parser)`` and ``run(args) -> int``; no
numerics live here.
"""

from lowdim.cli.main import COMMANDS, build_parser, main

__all__ = ["COMMANDS", "build_parser", "main"]
