"""`bondscope inspect`: what a checkpoint holds, without computing spectra."""

from ._common import add_layout_arguments, layout_options, print_json

HELP = "say what a checkpoint holds and what profiling it will cost (no spectra computed)"
ORDER = 1


def add_arguments(p):
    p.add_argument("file", metavar="FILE", help="HDF5 checkpoint")
    p.add_argument("--json", action="store_true", help="print the findings as JSON")
    add_layout_arguments(p)


def run(args):
    from .._pipeline import inspect
    from .._text import inspect_text

    info = inspect(args.file, **layout_options(args))
    if args.json:
        print_json(info)
    else:
        print(inspect_text(info))
    return 0
