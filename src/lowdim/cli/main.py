"""The ``lowdim`` command line: argparse front end, no numerics here.

Each sub-command lives in ``lowdim.cli.<name>`` with ``HELP``, ``add_arguments(parser)``
and ``run(args) -> int``. A user's mistake prints one line on stderr and exits with status 2;
an unexpected error prints one line calling it a defect, with the path of a log holding the
traceback.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import os
import sys
import tempfile
import tomllib
import traceback
from collections.abc import Sequence

from lowdim import __version__
from lowdim.errors import InputError

__all__ = ["main", "build_parser", "COMMANDS"]

# One module of this package per sub-command, in the order ``lowdim --help`` shows them.
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

log = logging.getLogger("lowdim")


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line, not the whole usage block
        self.exit(2, f"lowdim: error: {message} (see `{self.prog} --help`)\n")


def build_parser() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--plugin",
        action="append",
        default=[],
        metavar="FILE",
        help="a Python file that registers methods with @register_method (repeatable)",
    )
    common.add_argument("-v", "--verbose", action="store_true", help="log more detail")
    parser = _Parser(
        prog="lowdim",
        description="Compare dimensionality-reduction methods on generated, bundled and your "
        "own data, and see which to trust.",
    )
    parser.add_argument("--version", action="version", version=f"lowdim {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMANDS:
        module = importlib.import_module(f"lowdim.cli.{name}")
        cmd = sub.add_parser(
            name.replace("_", "-"),
            help=module.HELP,
            description=module.HELP,
            parents=[common],
        )
        module.add_arguments(cmd)
        cmd.set_defaults(_run=module.run)
    return parser


def _write_defect_log() -> str:
    fd, path = tempfile.mkstemp(prefix="lowdim-defect-", suffix=".log")
    with os.fdopen(fd, "w") as fh:
        fh.write(f"lowdim {__version__}\nargv: {sys.argv!r}\n\n")
        fh.write(traceback.format_exc())
    return path


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(
        level=logging.DEBUG if args.verbose else logging.WARNING,
        format="lowdim: %(levelname)s: %(message)s",
    )
    try:
        from lowdim.methods import PluginError, load_plugin

        for path in args.plugin:
            load_plugin(path)
        return int(args._run(args) or 0)
    except PluginError as exc:
        print(f"lowdim: plugin error: {exc}", file=sys.stderr)
        return 2
    except (InputError, FileNotFoundError, tomllib.TOMLDecodeError) as exc:
        print(f"lowdim: error: {_one_line(exc)}", file=sys.stderr)
        return 2
    except ValueError as exc:
        # Raised by a library below us on the user's data; still the user's input, still one line.
        print(f"lowdim: error: {_one_line(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("lowdim: interrupted; finished jobs are kept, run again to resume", file=sys.stderr)
        return 130
    except Exception as exc:
        path = _write_defect_log()
        print(
            f"lowdim: internal error (a defect in lowdim, please report it): "
            f"{type(exc).__name__}: {_one_line(exc)}; traceback in {path}",
            file=sys.stderr,
        )
        return 1


def _one_line(exc: BaseException) -> str:
    if isinstance(exc, FileNotFoundError) and exc.filename:
        return f"file not found: {exc.filename}"
    return " ".join(str(exc).split())


if __name__ == "__main__":
    sys.exit(main())
