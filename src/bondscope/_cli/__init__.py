"""Command-line entry point: parse, call the library, print.

Each verb is a module in this package defining ``HELP``, ``ORDER``,
``add_arguments(parser)`` and ``run(args) -> int``.  Verb modules import only
argparse-level code at import time so that ``bondscope --help`` stays instant.
"""

import argparse
import pkgutil
import sys
from importlib import import_module

from .._errors import (EXIT_CHECKPOINT, EXIT_FAILED, EXIT_MEMORY, EXIT_USAGE, CheckpointError,
                       MemoryLimitError, one_line)
from ._common import UsageError

__all__ = ["main", "build_parser"]

EPILOG = """exit status: 0 success, 1 internal failure, 2 usage error,
3 unreadable or invalid checkpoint/profile, 4 refused by the memory pre-flight,
5 batch ran but some checkpoints failed (their count is in the summary), 130 interrupted"""


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        raise UsageError(f"{self.prog}: {message}")


def _verbs():
    mods = [import_module(f"{__name__}.{m.name}") for m in pkgutil.iter_modules(__path__)
            if not m.name.startswith("_")]
    return sorted(mods, key=lambda m: (m.ORDER, m.__name__))


def build_parser():
    parser = _Parser(prog="bondscope",
                     description="Entanglement profiles of many-body states in HDF5 checkpoints.",
                     epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=_version())
    sub = parser.add_subparsers(dest="verb", metavar="VERB", parser_class=_Parser)
    for mod in _verbs():
        name = mod.__name__.rsplit(".", 1)[1]
        p = sub.add_parser(name, help=mod.HELP, description=mod.HELP)
        p.add_argument("--debug", action="store_true", help="show a traceback on errors")
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def _version():
    from .. import __version__
    return f"bondscope {__version__}"


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    debug = "--debug" in argv
    try:
        args = build_parser().parse_args(argv)
        if args.verb is None:
            build_parser().print_help(sys.stderr)
            return EXIT_USAGE
        from ._warnings import quiet_warnings

        # every verb: Python warnings as one 'warning:' line each, none with --quiet
        with quiet_warnings(getattr(args, "quiet", False)):
            return int(args._run(args) or 0)
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:
        if debug:
            raise
        from .._text import visible

        code, message = _classify(exc)
        print(f"error: {visible(message)}", file=sys.stderr)
        return code


def _classify(exc):
    message = one_line(exc)
    if isinstance(exc, UsageError):
        return EXIT_USAGE, message
    if isinstance(exc, MemoryLimitError):
        return EXIT_MEMORY, message
    if isinstance(exc, (CheckpointError, OSError, KeyError)):
        return EXIT_CHECKPOINT, message.strip("'\"")
    if isinstance(exc, (ValueError, TypeError)):
        return EXIT_USAGE, message
    return EXIT_FAILED, f"{type(exc).__name__}: {message} (rerun with --debug for a traceback)"
