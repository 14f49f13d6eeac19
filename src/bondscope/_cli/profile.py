"""`bondscope profile`: the entanglement profile of one checkpoint."""

import os
import sys

from ._common import (LAYOUT_FLAGS, MEASURE_FLAGS, RESOURCE_FLAGS, UsageError, add_flags,
                      profile_options)

HELP = "profile a checkpoint: Schmidt spectra and entropies at every cut"
ORDER = 0


def add_arguments(p):
    p.add_argument("file", metavar="FILE", nargs="+",
                   help="HDF5 checkpoint (state vector or MPS), or a saved profile to show "
                        "again")
    p.add_argument("--json", action="store_true",
                   help="print the profile document as JSON on stdout (and nothing else there)")
    p.add_argument("-o", "--output", metavar="OUT",
                   help="also save the profile: .json, .h5 (a new results file) or .csv")
    add_flags(p, *LAYOUT_FLAGS, *MEASURE_FLAGS, *RESOURCE_FLAGS)


def run(args):
    from .._document import is_saved_profile, load_profile
    from .._options import ProfileOptions
    from .._pipeline import profile
    from .._text import profile_table, visible

    path = _one_checkpoint(args.file, visible)
    opts = profile_options(args)
    if is_saved_profile(path):
        prof = load_profile(path)
        if opts.recorded() != ProfileOptions().recorded() and not args.quiet:
            print(f"note: {visible(path)} is a saved profile, shown as saved; profiling "
                  "options apply to checkpoints", file=sys.stderr)
    else:
        prof = profile(path, opts, progress=not args.quiet)
    if args.output:
        prof.save(args.output, protect=[path])
    if args.json:
        sys.stdout.write(prof.to_json(indent=1) + "\n")
    else:
        print(profile_table(prof))
        if args.output:
            print(f"profile written to {visible(args.output)}")
    return 0


def _one_checkpoint(files, visible):
    if len(files) > 1:
        raise UsageError(f"profile takes one checkpoint, found {len(files)}; for several use "
                         f"`bondscope batch {' '.join(visible(f) for f in files[:3])}"
                         f"{' ...' if len(files) > 3 else ''} --out RESULTS`")
    if os.path.isdir(files[0]):
        raise UsageError(f"{visible(files[0])}: is a directory; to profile the checkpoints in "
                         f"it use `bondscope batch {visible(files[0])} --out RESULTS`")
    return files[0]
