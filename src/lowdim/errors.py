"""Exceptions shared by every part of lowdim.

A user's mistake (bad data, a bad parameter, a bad suite) is an :class:`InputError`, a
``ValueError`` subclass, so the Python API raises ``ValueError`` as scikit-learn users expect
and the command line can print it as one line with exit status 2.
"""

import difflib
from collections.abc import Iterable

__all__ = ["InputError", "closest_name", "suggestion"]


class InputError(ValueError):
    """Bad input from the user: the message is one sentence saying what, where and how to fix."""


def closest_name(name: str, choices: Iterable[str]) -> str | None:
    """Return the valid name closest to ``name``, or None when nothing is close."""
    matches = difflib.get_close_matches(str(name), [str(c) for c in choices], n=1, cutoff=0.5)
    return matches[0] if matches else None


def suggestion(name: str, choices: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest valid name, or an empty string."""
    choices = list(choices)
    best = closest_name(name, choices)
    return f" (did you mean {best!r}?)" if best is not None else ""
