"""`bondscope inspect`: what a checkpoint holds, without computing spectra."""

from ._common import LAYOUT_FLAGS, add_flags, print_json, profile_options

HELP = "say what a checkpoint holds and what profiling it will cost (no spectra computed)"
ORDER = 1


def add_arguments(p):
    p.add_argument("file", metavar="FILE", help="HDF5 checkpoint")
    p.add_argument("--json", action="store_true", help="print the findings as JSON")
    add_flags(p, *LAYOUT_FLAGS, "route", "precision", "charges", "modulus", "disentangle")


def run(args):
    from .._pipeline import inspect
    from .._text import inspect_text

    info = inspect(args.file, profile_options(args))
    if args.json:
        print_json(info)
    else:
        print(inspect_text(info))
    return 0
