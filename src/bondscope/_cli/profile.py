"""`bondscope profile`: the entanglement profile of one checkpoint."""

import sys

from ._common import LAYOUT_FLAGS, MEASURE_FLAGS, RESOURCE_FLAGS, add_flags, profile_options

HELP = "profile a checkpoint: Schmidt spectra and entropies at every cut"
ORDER = 0


def add_arguments(p):
    p.add_argument("file", metavar="FILE", help="HDF5 checkpoint (state vector or MPS)")
    p.add_argument("--json", action="store_true",
                   help="print the profile document as JSON on stdout (and nothing else there)")
    p.add_argument("-o", "--output", metavar="OUT",
                   help="also save the profile: .json, .h5 (a new results file) or .csv")
    add_flags(p, *LAYOUT_FLAGS, *MEASURE_FLAGS, *RESOURCE_FLAGS)


def run(args):
    from .._pipeline import profile
    from .._text import profile_table, visible
    from ._warnings import quiet_warnings

    with quiet_warnings(args.quiet):
        prof = profile(args.file, profile_options(args), progress=not args.quiet)
    if args.output:
        prof.save(args.output, protect=[args.file])
    if args.json:
        sys.stdout.write(prof.to_json(indent=1) + "\n")
    else:
        print(profile_table(prof))
        if args.output:
            print(f"profile written to {visible(args.output)}")
    return 0
