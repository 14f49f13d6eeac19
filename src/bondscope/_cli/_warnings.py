"""Warnings as one-line 'warning:' messages on stderr (or silenced with --quiet)."""

import sys
import warnings
from contextlib import contextmanager

from .._errors import one_line
from .._text import visible

__all__ = ["quiet_warnings"]


@contextmanager
def quiet_warnings(quiet=False):
    def show(message, category, filename, lineno, file=None, line=None):
        print(f"warning: {visible(one_line(message))}", file=sys.stderr)

    with warnings.catch_warnings():
        if quiet:
            warnings.simplefilter("ignore")
        else:
            warnings.simplefilter("always")
            warnings.showwarning = show
        yield
