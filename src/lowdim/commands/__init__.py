"""Sub-commands of the ``lowdim`` command line, one module each (see ``lowdim.cli``).

Add a command by writing ``lowdim/commands/<name>.py`` with ``HELP``, ``add_arguments`` and
``run``, and listing its module name here, in the order ``lowdim --help`` shows them.
"""

COMMANDS: list[str] = [
    "run",
    "status",
    "report",
    "compare",
    "embed",
    "methods",
    "datasets",
    "metrics",
]
