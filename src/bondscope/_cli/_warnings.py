"""Warnings as one-line 'warning:' messages on stderr (or silenced with --quiet)."""

import sys
import warnings
from contextlib import contextmanager

from .._errors import one_line
from .._text import visible

__all__ = ["quiet_warnings", "warn_lines"]


@contextmanager
def quiet_warnings(quiet=False):
    """Inside: every Python warning is one ``warning:`` line on stderr, or none when quiet."""
    def show(message, category, filename, lineno, file=None, line=None):
        print(f"warning: {visible(one_line(message))}", file=sys.stderr)

    with warnings.catch_warnings():
        if quiet:
            warnings.simplefilter("ignore")
        else:
            warnings.simplefilter("always")
            warnings.showwarning = show
        yield


def warn_lines(messages):
    """Issue each message as a warning (shown as one line, or silenced, by quiet_warnings)."""
    for message in messages:
        warnings.warn(one_line(message), UserWarning, stacklevel=2)
