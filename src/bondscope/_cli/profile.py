"""`bondscope profile`: the entanglement profile of one checkpoint."""

import sys

from ._common import add_layout_arguments, add_measure_arguments, layout_options, measure_options

HELP = "profile a checkpoint: Schmidt spectra and entropies at every cut"
ORDER = 0


def add_arguments(p):
    p.add_argument("file", metavar="FILE", help="HDF5 checkpoint (state vector or MPS)")
    p.add_argument("--json", action="store_true",
                   help="print the profile document as JSON on stdout (and nothing else there)")
    p.add_argument("-o", "--output", metavar="OUT",
                   help="also save the profile: .json, .h5 (a new results file) or .csv")
    add_layout_arguments(p)
    add_measure_arguments(p)


def run(args):
    from .._pipeline import profile
    from .._text import profile_table
    from ._warnings import quiet_warnings

    with quiet_warnings(args.quiet):
        prof = profile(args.file, progress=not args.quiet, **layout_options(args),
                       **measure_options(args))
    if args.output:
        prof.save(args.output, protect=[args.file])
    if args.json:
        sys.stdout.write(prof.to_json(indent=1) + "\n")
    else:
        print(profile_table(prof))
        if args.output:
            print(f"profile written to {args.output}")
    return 0
