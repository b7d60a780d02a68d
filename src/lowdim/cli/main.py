"""The ``lowdim`` command line: argparse front end, no numerics here.

Each sub-command lives in ``lowdim.cli.<name>`` with ``HELP``, ``add_arguments(parser)``
and ``run(args) -> int``.

The error policy: the project's own input errors (:class:`~lowdim.errors.InputError`, and a
plugin that fails to import) and ordinary environment problems (a missing or unreadable file,
a folder where a file was expected or the reverse, a symlink loop, a read-only or full disk)
print one line on stderr and exit with status 2. Standard output closed by its reader
(``lowdim methods | head -1``) ends the command quietly, also with status 2. Anything else,
including a bare ``ValueError`` from a library, is a defect: one line saying so, with the path
of a log holding the traceback, and status 1. So every user mistake must be caught where it
first appears and raised as an ``InputError`` with a message saying what, where and how to fix.
"""

from __future__ import annotations

import argparse
import errno
import importlib
import logging
import os
import sys
import tempfile
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


# OSError numbers that are the user's environment, not a defect: each gets one line.
ENVIRONMENT_ERRNOS = frozenset(
    {
        errno.ENOENT,
        errno.EACCES,
        errno.EPERM,
        errno.EISDIR,
        errno.ENOTDIR,
        errno.ELOOP,
        errno.EEXIST,
        errno.EROFS,
        errno.ENOSPC,
        errno.EDQUOT,
        errno.ENAMETOOLONG,
    }
)
_HINTS = {
    errno.ENOENT: "check the path",
    errno.EACCES: "check its permissions or choose another path",
    errno.EPERM: "check its permissions or choose another path",
    errno.EISDIR: "a folder was given where a file is needed",
    errno.ENOTDIR: "a part of the path is a file, not a folder",
    errno.ELOOP: "a symbolic link points back at itself; point it at a real file",
    errno.EEXIST: "choose another path",
    errno.EROFS: "the file system is read-only; choose another place",
    errno.ENOSPC: "the disk is full; free some space",
    errno.EDQUOT: "the disk quota is used up; free some space",
    errno.ENAMETOOLONG: "shorten the path",
}


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
        status = int(args._run(args) or 0)
        sys.stdout.flush()  # a closed pipe shows here, not at exit
        return status
    except PluginError as exc:
        print(f"lowdim: plugin error: {exc}", file=sys.stderr)
        return 2
    except InputError as exc:
        print(f"lowdim: error: {_one_line(exc)}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        _silence_stdout()
        return 2
    except OSError as exc:
        if exc.errno not in ENVIRONMENT_ERRNOS:
            return _defect(exc)
        print(f"lowdim: error: {environment_message(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("lowdim: interrupted; finished jobs are kept, run again to resume", file=sys.stderr)
        return 130
    except Exception as exc:
        return _defect(exc)


def _defect(exc: BaseException) -> int:
    path = _write_defect_log()
    print(
        f"lowdim: internal error (a defect in lowdim, please report it): "
        f"{type(exc).__name__}: {_one_line(exc)}; traceback in {path}",
        file=sys.stderr,
    )
    return 1


def _silence_stdout() -> None:
    # The reader has gone: send what is still buffered, and the interpreter's final flush,
    # to /dev/null so no second error is printed at exit.
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass  # stdout is not a file descriptor (e.g. captured in tests)
    finally:
        os.close(devnull)


def environment_message(exc: OSError) -> str:
    """One line for an environment problem: what happened, to which path, what to do."""
    what = (exc.strerror or type(exc).__name__).rstrip(".").lower()
    paths = [str(p) for p in (exc.filename, exc.filename2) if p is not None]
    where = f" ({' -> '.join(repr(p) for p in paths)})" if paths else ""
    hint = _HINTS.get(exc.errno or 0)
    return f"{what}{where}" + (f"; {hint}" if hint else "")


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split())


if __name__ == "__main__":
    sys.exit(main())
